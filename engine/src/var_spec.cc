#include "rimwatch/engine/var_spec.h"

#include <cmath>
#include <set>
#include <sstream>

namespace rimwatch {

int VarSpec::num_deterministic() const {
  switch (deterministic) {
    case Deterministic::kNone:
      return 0;
    case Deterministic::kConstant:
      return 1;
    case Deterministic::kTrend:
      return 2;
  }
  return 0;
}

std::string VarSpec::RegressorName(int j) const {
  const int d = num_deterministic();
  if (j < d) return j == 0 ? "const" : "trend";
  const int lag = (j - d) / n() + 1;
  const int var = (j - d) % n();
  std::string name = std::to_string(lag);  // appended piecewise: GCC 12 -Wrestrict false positive
  name.insert(0, 1, 'L');
  name += '.';
  name += variables[var];
  return name;
}

int VarSpec::VariableIndex(const std::string& name) const {
  for (int i = 0; i < n(); ++i) {
    if (variables[i] == name) return i;
  }
  return -1;
}

bool VarSpec::IsValid(std::string* why, bool allow_zero_lags) const {
  std::ostringstream msg;
  if (variables.empty()) {
    msg << "variables: empty; a VAR needs at least one variable";
  } else if (std::set<std::string>(variables.begin(), variables.end()).size() != variables.size()) {
    msg << "variables: names must be unique";
  } else if (lags < (allow_zero_lags ? 0 : 1)) {
    msg << "lags = " << lags << ": must be >= " << (allow_zero_lags ? 0 : 1);
  } else if (lags > 1000) {
    msg << "lags = " << lags << ": must be <= 1000";
  } else if (window.kind == WindowKind::kSliding && window.rows < 1) {
    msg << "window.rows = " << window.rows << ": must be >= 1";
  } else if (window.kind == WindowKind::kForgetting &&
             !(window.lambda > 0.0 && window.lambda <= 1.0)) {
    msg << "window.lambda = " << window.lambda << ": must lie in (0, 1]";
  } else if (window.robust_row_cap < 1) {
    msg << "window.robust_row_cap = " << window.robust_row_cap << ": must be >= 1";
  } else if (!(window.weight_floor > 0.0 && window.weight_floor < 1.0)) {
    msg << "window.weight_floor = " << window.weight_floor << ": must lie in (0, 1)";
  } else {
    for (const auto& v : variables) {
      if (v.empty()) {
        msg << "variables: a name is empty";
        break;
      }
    }
  }
  const std::string text = msg.str();
  if (text.empty()) return true;
  if (why) *why = text;
  return false;
}

const char* DeterministicName(Deterministic d) {
  switch (d) {
    case Deterministic::kNone:
      return "none";
    case Deterministic::kConstant:
      return "constant";
    case Deterministic::kTrend:
      return "trend";
  }
  return "?";
}

const char* WindowKindName(WindowKind w) {
  switch (w) {
    case WindowKind::kExpanding:
      return "expanding";
    case WindowKind::kSliding:
      return "sliding";
    case WindowKind::kForgetting:
      return "forgetting";
  }
  return "?";
}

bool ParseDeterministic(const std::string& text, Deterministic* out) {
  if (text == "none") {
    *out = Deterministic::kNone;
  } else if (text == "constant") {
    *out = Deterministic::kConstant;
  } else if (text == "trend") {
    *out = Deterministic::kTrend;
  } else {
    return false;
  }
  return true;
}

bool ParseWindowKind(const std::string& text, WindowKind* out) {
  if (text == "expanding") {
    *out = WindowKind::kExpanding;
  } else if (text == "sliding") {
    *out = WindowKind::kSliding;
  } else if (text == "forgetting") {
    *out = WindowKind::kForgetting;
  } else {
    return false;
  }
  return true;
}

}  // namespace rimwatch
