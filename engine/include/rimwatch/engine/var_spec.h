// VarSpec: the shape of a VAR(p) and how its estimation window behaves.
//
// Model: y_t = Phi x_t + e_t, y_t an n-vector, x_t = (d_t', y_{t-1}', ..., y_{t-p}')' with
// k = dim(d) + n p regressors. d_t is nothing, the constant 1, or (1, t) where the trend t is the
// 1-based number of the observation (presample included): p + 1 at the first estimation row.
// That is statsmodels' VAR convention; a shift of the trend origin changes only the constant.
// Regressor order: const, trend, then lag 1 of every variable, lag 2 of every variable, ...
// theta = vec(Phi') stacks the coefficients equation by equation: theta[eq * k + j].
//
// Options are plain structs with in-class defaults; validate once with IsValid().
#pragma once

#include <cstddef>
#include <string>
#include <vector>

namespace rimwatch {

enum class Deterministic { kNone, kConstant, kTrend };  // kTrend = constant + linear trend

enum class WindowKind {
  kExpanding,   // every row since the start, equal weights: exact OLS
  kSliding,     // the last `rows` rows, equal weights: exact OLS on them
  kForgetting,  // weight lambda^(T - t) on row t: exponentially weighted LS
};

struct WindowOptions {
  WindowKind kind = WindowKind::kExpanding;
  // Sliding window length in rows. Range: >= 1 (rows < k leaves the model rank deficient).
  std::size_t rows = 500;
  // Forgetting factor in (0, 1]; effective memory about 1 / (1 - lambda) rows. 1 = expanding.
  double lambda = 0.995;
  // Sliding only: refold the factor from the row buffer after this many downdates, so rounding
  // stays bounded (a downdate that would lose definiteness triggers a refold at once).
  // 0 = every `rows` downdates. Trade-off: cost of one refold is rows (k+n)^2.
  std::size_t refold_every = 0;
  // Rows kept for robust covariances (HC*, HAC) under the expanding window, and the upper bound
  // for forgetting. With more rows than this, robust statistics use the most recent rows only and
  // say so. Memory: about 8 (k + n) bytes per row.
  std::size_t robust_row_cap = 100000;
  // Forgetting only: a row leaves the robust buffer once its weight lambda^age is below this.
  double weight_floor = 1e-8;
};

struct VarSpec {
  std::vector<std::string> variables;  // n names, in column order; n >= 1, unique, non-empty
  int lags = 1;                        // p >= 1 (p = 0 is allowed only inside lag-order search)
  Deterministic deterministic = Deterministic::kConstant;
  WindowOptions window;

  int n() const { return static_cast<int>(variables.size()); }
  int num_deterministic() const;  // 0, 1 or 2
  int k() const { return num_deterministic() + n() * lags; }
  // Index of the coefficient of variable `var` at lag `lag` (1-based) among the k regressors.
  int LagRegressor(int lag, int var) const { return num_deterministic() + (lag - 1) * n() + var; }
  // "const", "trend", or "L<lag>.<variable>".
  std::string RegressorName(int j) const;
  // Index of a variable by name, or -1.
  int VariableIndex(const std::string& name) const;

  // True when the spec is usable; otherwise *why names the field, its value and the rule.
  // allow_zero_lags is for lag-order search only.
  bool IsValid(std::string* why, bool allow_zero_lags = false) const;
};

const char* DeterministicName(Deterministic d);  // "none" | "constant" | "trend"
const char* WindowKindName(WindowKind w);        // "expanding" | "sliding" | "forgetting"
bool ParseDeterministic(const std::string& text, Deterministic* out);
bool ParseWindowKind(const std::string& text, WindowKind* out);

}  // namespace rimwatch
