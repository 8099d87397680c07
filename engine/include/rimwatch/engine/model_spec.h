// ModelSpec: everything a monitored model needs, shared by rimwatchd and `rimwatch replay`.
// The text form is TOML (schemas/model.example.toml); parsing lives outside the engine
// (daemon/model_spec_toml.h), validation lives here so every reader applies the same rules.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>
#include <vector>

#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

enum class Transform { kLevel, kDiff, kLogDiff };  // y, y_t - y_{t-1}, ln y_t - ln y_{t-1}
const char* TransformName(Transform t);            // "level" | "diff" | "logdiff"
bool ParseTransform(const std::string& text, Transform* out);

enum class RestrictionKind { kGranger, kExcludeLag, kMatrix };

struct RestrictionSpec {
  std::string name;  // unique within the model; [A-Za-z0-9_.-]+
  RestrictionKind kind = RestrictionKind::kGranger;
  std::vector<std::string> cause;   // kGranger
  std::vector<std::string> effect;  // kGranger
  int lag = 0;                      // kExcludeLag: 1..p
  Eigen::MatrixXd r_matrix;         // kMatrix: q x (n k), theta = vec(Phi') equation by equation
  Eigen::VectorXd r_value;          // kMatrix: q
};

struct InferenceSpec {
  CovarianceOptions covariance;  // kind and HAC lag for every robust statistic of the model
  int every = 1;                 // robust statistics (SEs, restriction tests) every N rows, >= 1
};

struct StabilitySpec {
  double warn = 0.95;      // spectral radius at or above: warn
  double critical = 0.99;  // at or above: critical; also critical when rho + 1.645 SE >= 1
  int slope_rows = 50;     // rows used for the slope behind "rows until rho reaches 1"
};

// Parameter-constancy monitors (constancy.h, ConstancyMonitor), each on its own alert:
//   "constancy.nyblom_hansen"       the robust Nyblom-Hansen statistic of all n k coefficients on
//                                   successive disjoint blocks of B rows;
//   "constancy.reference_equality"  the robust Wald equality test of the reference sample (rows
//                                   since the monitor's start, before the block) and the latest
//                                   block of B rows.
struct ConstancySpec {
  bool nyblom_hansen = true;       // run constancy.nyblom_hansen
  bool reference_equality = true;  // run constancy.reference_equality
  // B: rows per block, i.e. the length of the recent sample and the spacing of evaluations.
  // 0 = automatic: max(training_rows, (n + 1) k + 10). When set: >= (n + 1) k + 10 (more rows
  // than the n k coefficients, and k + 10 more for the small-sample form of the equality test),
  // and <= the horizon in rows. Trade-off: a shorter block reacts sooner but each evaluation is
  // held to alpha / E with more evaluations E = floor(H / B), and each sees fewer rows.
  std::int64_t block_rows = 0;

  bool any() const { return nyblom_hansen || reference_equality; }
};

struct AlarmSpec {
  // Chance of any false critical alarm per monitor over the horizon, in (0, 0.5].
  double false_alarm = 0.05;
  // Chance of any false warning per monitor over the horizon, in [false_alarm, 0.9].
  double warn_false_alarm = 0.20;
  // Monitoring horizon in multiples of training.rows, >= 1.
  double horizon = 10.0;
  // Rows a statistic must stay below its clear level before an alert clears, >= 1.
  int hysteresis = 5;
  // Rows after a clear during which the same monitor does not raise again, >= 0.
  int cooldown = 20;
};

struct ModelSpec {
  std::string name;                   // [A-Za-z0-9_.-]+, at most 64 characters
  VarSpec var;                        // variables, lags, deterministic, window
  std::vector<Transform> transforms;  // one per variable (level by default)
  InferenceSpec inference;
  int training_rows = 200;  // rows before the monitors arm; >= k + 10
  StabilitySpec stability;
  std::vector<RestrictionSpec> restrictions;
  ConstancySpec constancy;
  AlarmSpec alarms;

  // Horizon in rows: alarms.horizon * training_rows.
  std::int64_t HorizonRows() const;
  // B of the constancy monitors: constancy.block_rows, or the automatic value when it is 0.
  std::int64_t ConstancyBlockRows() const;
  // True when usable; otherwise *why names the key, its value and the rule.
  bool IsValid(std::string* why) const;
};

}  // namespace rimwatch
