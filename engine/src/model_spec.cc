#include "rimwatch/engine/model_spec.h"

#include <algorithm>
#include <cmath>
#include <set>
#include <sstream>

namespace rimwatch {
namespace {

bool ValidName(const std::string& s, std::size_t max_len) {
  if (s.empty() || s.size() > max_len) return false;
  for (char c : s) {
    const bool ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
                    c == '_' || c == '.' || c == '-';
    if (!ok) return false;
  }
  return true;
}

bool Fail(std::string* why, const std::string& msg) {
  if (why) *why = msg;
  return false;
}

std::string Num(double v) {
  std::ostringstream out;
  out << v;
  return out.str();
}

bool ValidRestriction(const ModelSpec& m, const RestrictionSpec& r, std::string* why) {
  const std::string where = "restriction '" + r.name + "'";
  switch (r.kind) {
    case RestrictionKind::kGranger: {
      if (r.cause.empty() || r.effect.empty()) {
        return Fail(why, where + ": granger needs non-empty cause and effect lists");
      }
      std::set<std::string> cause(r.cause.begin(), r.cause.end());
      for (const auto& v : r.cause) {
        if (m.var.VariableIndex(v) < 0) {
          return Fail(why, where + ": granger.cause names unknown variable '" + v + "'");
        }
      }
      for (const auto& v : r.effect) {
        if (m.var.VariableIndex(v) < 0) {
          return Fail(why, where + ": granger.effect names unknown variable '" + v + "'");
        }
        if (cause.count(v)) {
          return Fail(why, where + ": variable '" + v + "' is in both granger.cause and effect");
        }
      }
      return true;
    }
    case RestrictionKind::kExcludeLag:
      if (r.lag < 1 || r.lag > m.var.lags) {
        return Fail(why, where + ": exclude_lag = " + std::to_string(r.lag) + " must lie in 1.." +
                             std::to_string(m.var.lags));
      }
      return true;
    case RestrictionKind::kMatrix: {
      const int nk = m.var.n() * m.var.k();
      if (r.r_matrix.rows() < 1 || r.r_matrix.cols() != nk) {
        return Fail(why, where + ": matrix.R must have >= 1 row and n k = " + std::to_string(nk) +
                             " columns (theta = vec(Phi') equation by equation); it has " +
                             std::to_string(r.r_matrix.cols()));
      }
      if (r.r_value.size() != r.r_matrix.rows()) {
        return Fail(why, where + ": matrix.r must have one entry per row of R");
      }
      if (!r.r_matrix.allFinite() || !r.r_value.allFinite()) {
        return Fail(why, where + ": matrix entries must be finite numbers");
      }
      return true;
    }
  }
  return true;
}

}  // namespace

const char* TransformName(Transform t) {
  switch (t) {
    case Transform::kLevel:
      return "level";
    case Transform::kDiff:
      return "diff";
    case Transform::kLogDiff:
      return "logdiff";
  }
  return "?";
}

bool ParseTransform(const std::string& text, Transform* out) {
  if (text == "level") {
    *out = Transform::kLevel;
  } else if (text == "diff") {
    *out = Transform::kDiff;
  } else if (text == "logdiff") {
    *out = Transform::kLogDiff;
  } else {
    return false;
  }
  return true;
}

std::int64_t ModelSpec::HorizonRows() const {
  return static_cast<std::int64_t>(std::ceil(alarms.horizon * training_rows));
}

std::int64_t ModelSpec::ConstancyBlockRows() const {
  if (constancy.block_rows != 0) return constancy.block_rows;
  const std::int64_t k = var.k();
  return std::max<std::int64_t>(training_rows, (var.n() + 1) * k + 10);
}

namespace {

bool ValidConstancy(const ModelSpec& m, std::string* why) {
  if (!m.constancy.any()) return true;
  const std::int64_t k = m.var.k();
  const std::int64_t least = (m.var.n() + 1) * k + 10;
  const std::int64_t b = m.ConstancyBlockRows();
  const std::string value =
      m.constancy.block_rows == 0
          ? std::to_string(b) + " (automatic: max(training.rows, (n + 1) k + 10))"
          : std::to_string(b);
  if (m.constancy.block_rows != 0 && b < least) {
    return Fail(why, "constancy.block_rows = " + value +
                         ": must be >= (n + 1) k + 10 = " + std::to_string(least) +
                         " (more rows than the n k = " + std::to_string(m.var.n() * k) +
                         " coefficients, plus k + 10)");
  }
  if (b > m.HorizonRows()) {
    return Fail(why, "constancy.block_rows = " + value + ": must be <= the horizon of " +
                         std::to_string(m.HorizonRows()) +
                         " rows (alarms.horizon x training.rows); raise alarms.horizon or set "
                         "constancy.tests = []");
  }
  // The equality test keeps the reference sample's rows (at most training + horizon) for its
  // robust covariance; the buffer may not be truncated.
  const std::int64_t kept = m.training_rows + m.HorizonRows();
  if (m.constancy.reference_equality &&
      kept > static_cast<std::int64_t>(m.var.window.robust_row_cap)) {
    return Fail(why, "constancy.tests: reference_equality keeps training.rows + horizon = " +
                         std::to_string(kept) + " rows for its reference covariance, more than " +
                         std::to_string(m.var.window.robust_row_cap) +
                         "; lower alarms.horizon or training.rows, or drop reference_equality");
  }
  return true;
}

}  // namespace

bool ModelSpec::IsValid(std::string* why) const {
  if (!ValidName(name, 64)) {
    return Fail(why, "name = '" + name + "': use 1 to 64 characters from A-Z a-z 0-9 _ . -");
  }
  std::string var_why;
  if (!var.IsValid(&var_why)) return Fail(why, var_why);
  for (const auto& v : var.variables) {
    if (!ValidName(v, 64)) {
      return Fail(why, "variables: '" + v + "' must be 1 to 64 characters from A-Z a-z 0-9 _ . -");
    }
  }
  if (static_cast<int>(transforms.size()) != var.n()) {
    return Fail(why, "transform: one entry per variable expected");
  }
  if (inference.every < 1) {
    return Fail(why, "covariance.every = " + std::to_string(inference.every) + ": must be >= 1");
  }
  if (inference.covariance.hac_lags < -1) {
    return Fail(why, "covariance.hac_lags = " + std::to_string(inference.covariance.hac_lags) +
                         ": must be >= 0, or -1 for the rule of thumb");
  }
  if (training_rows < var.k() + 10) {
    return Fail(why, "training.rows = " + std::to_string(training_rows) + ": must be >= k + 10 = " +
                         std::to_string(var.k() + 10) + " (k regressors per equation)");
  }
  if (var.window.kind == WindowKind::kSliding &&
      static_cast<std::int64_t>(var.window.rows) < var.k() + 10) {
    return Fail(why, "window.rows = " + std::to_string(var.window.rows) +
                         ": must be >= k + 10 = " + std::to_string(var.k() + 10));
  }
  const StabilitySpec& s = stability;
  if (!(s.warn > 0.0 && s.warn < s.critical && s.critical <= 2.0)) {
    return Fail(why, "stability.warn = " + Num(s.warn) + ", stability.critical = " +
                         Num(s.critical) + ": need 0 < warn < critical <= 2");
  }
  if (s.slope_rows < 3) {
    return Fail(why, "stability.slope_rows = " + std::to_string(s.slope_rows) + ": must be >= 3");
  }
  const AlarmSpec& a = alarms;
  if (!(a.false_alarm > 0.0 && a.false_alarm <= 0.5)) {
    return Fail(why, "alarms.false_alarm = " + Num(a.false_alarm) + ": must lie in (0, 0.5]");
  }
  if (!(a.warn_false_alarm >= a.false_alarm && a.warn_false_alarm <= 0.9)) {
    return Fail(why, "alarms.warn_false_alarm = " + Num(a.warn_false_alarm) +
                         ": must lie in [alarms.false_alarm, 0.9]");
  }
  if (!(a.horizon >= 1.0 && a.horizon <= 1000.0)) {
    return Fail(why, "alarms.horizon = " + Num(a.horizon) +
                         ": must lie in [1, 1000] (multiples of training.rows)");
  }
  if (a.hysteresis < 1) {
    return Fail(why, "alarms.hysteresis = " + std::to_string(a.hysteresis) + ": must be >= 1");
  }
  if (a.cooldown < 0) {
    return Fail(why, "alarms.cooldown = " + std::to_string(a.cooldown) + ": must be >= 0");
  }
  if (!ValidConstancy(*this, why)) return false;
  std::set<std::string> names;
  for (const RestrictionSpec& r : restrictions) {
    if (!ValidName(r.name, 64)) {
      return Fail(
          why, "restriction name '" + r.name + "': use 1 to 64 characters from A-Z a-z 0-9 _ . -");
    }
    if (!names.insert(r.name).second) {
      return Fail(why, "restriction name '" + r.name + "' is used twice");
    }
    if (!ValidRestriction(*this, r, why)) return false;
  }
  return true;
}

}  // namespace rimwatch
