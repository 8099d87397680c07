// Shared scaffolding of the calibration tests: the replication scale, the invented 3-variable
// VAR(2) design, its error laws and simulator, quantiles of detection delays, and the oracle
// Page CUSUM that detection delays are compared with.
//
// Design (the invented process of tests/reference/make_reference.py, case sim_const): n = 3,
// p = 2, a constant, Omega = L L' with L lower triangular; A2(1,3) = 0.05 there, and 0 in the
// variant where y3 does not Granger-cause y1 (A1(1,3) = A2(1,3) = 0). Spectral radius 0.697 and
// 0.686. Presample p = 2 after a burn-in of 200 observations from zero, T_train = m = 200
// estimation rows, then a horizon of H = 10 x 200 = 2000 rows.
//   Gaussian errors: e_t = L z_t, z_t ~ N(0, I).
//   GARCH(1,1)-type errors: h_jt = 0.1 + 0.15 g_{j,t-1}^2 + 0.75 h_{j,t-1}, g_jt = sqrt(h_jt) z_jt,
//     e_t = L g_t (Bollerslev 1986, "Generalized autoregressive conditional heteroskedasticity",
//     J. Econometrics 31; unconditional variance 1, persistence 0.9).
// Draws come from mc::GaussianSource (tests/montecarlo/mc_support.h), so a seed gives the same
// paths with any standard library.
//
// Oracle (Page 1954, "Continuous inspection schemes", Biometrika 41; Lorden 1971, "Procedures
// for reacting to a change in distribution", Ann. Math. Statist. 42): Page's CUSUM
// S_t = max(0, S_{t-1} + l_t) on the true log-likelihood ratio l_t of the post-change against the
// pre-change law, started at the arming row. Its threshold is the (1 - alpha) quantile of its path
// maximum over the horizon in replications without a change, so it holds the same false-alarm
// chance over H as the monitor it is compared with. Lorden (1971) shows that among rules with a
// given false-alarm constraint none has a smaller worst-case expected delay, asymptotically, than
// Page's CUSUM on the true ratio: its delay is the benchmark, not a target a monitor that does not
// know the change can reach.
#pragma once

#include <gtest/gtest.h>

#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdlib>
#include <limits>
#include <string>
#include <vector>

#include "../montecarlo/mc_support.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch::calibration {

constexpr int kLags = 2;
constexpr int kBurnIn = 200;
constexpr int kTrainRows = 200;            // m: estimation rows before the monitors arm
constexpr int kHorizon = 10 * kTrainRows;  // H: monitored rows
constexpr int kObservations = kLags + kTrainRows + kHorizon;
constexpr double kAlpha = 0.05;
constexpr double kWarnAlpha = 0.20;
constexpr double kNever = std::numeric_limits<double>::infinity();  // an undetected change

// Observation index (0-based, after the burn-in) of estimation row r (1-based): r + p - 1.
constexpr int ObservationOfRow(int row) { return row + kLags - 1; }

// RIMWATCH_CALIBRATION_SCALE (default 1) scales a replication count down, never below `floor`
// (the count that keeps the claim it supports); values >= 1 or unparsable leave `base`.
inline int Scaled(int base, int floor) {
  const char* env = std::getenv("RIMWATCH_CALIBRATION_SCALE");
  const double scale = env != nullptr ? std::atof(env) : 1.0;
  if (!(scale > 0.0) || scale >= 1.0) return base;
  return std::max(floor, static_cast<int>(std::lround(base * scale)));
}

struct VarDesign {
  std::vector<Eigen::MatrixXd> a;  // A_1, A_2 (3 x 3)
  Eigen::VectorXd c;               // constant
  Eigen::MatrixXd chol;            // L, Omega = L L'
  Eigen::MatrixXd omega;
};

// The sim_const design with A2(1,3) = a2_13 (0.05 as published there; 0 for the variant without
// the y3 -> y1 link).
inline VarDesign MakeDesign(double a2_13) {
  VarDesign d;
  Eigen::MatrixXd a1(3, 3), a2(3, 3), l(3, 3);
  a1 << 0.55, 0.15, 0.00, 0.10, 0.45, 0.10, 0.05, 0.20, 0.40;
  a2 << -0.15, 0.00, a2_13, 0.00, 0.10, 0.00, 0.10, -0.05, -0.10;
  l << 1.0, 0.0, 0.0, 0.3, 0.8, 0.0, -0.2, 0.1, 0.6;
  d.a = {a1, a2};
  d.c = Eigen::Vector3d(0.5, -0.2, 0.1);
  d.chol = l;
  d.omega = l * l.transpose();
  return d;
}

// The estimation spec of the design: y1..y3, p = 2, a constant, the given window.
inline VarSpec MakeSpec(WindowKind kind, std::size_t robust_row_cap,
                        std::size_t window_rows = 500) {
  VarSpec spec;
  spec.variables = {"y1", "y2", "y3"};
  spec.lags = kLags;
  spec.deterministic = Deterministic::kConstant;
  spec.window.kind = kind;
  spec.window.rows = window_rows;
  spec.window.robust_row_cap = robust_row_cap;
  return spec;
}

// The standardised shocks g_t of one replication (e_t = L g_t): N(0, I), or GARCH(1,1)-type with
// the recursion above (state carried between draws).
class ShockLaw {
 public:
  ShockLaw(int n, bool garch)
      : garch_(garch), h_(Eigen::VectorXd::Ones(n)), g_prev_(Eigen::VectorXd::Zero(n)) {}

  Eigen::VectorXd Draw(mc::GaussianSource* source) {
    Eigen::VectorXd g = source->NormalVector(static_cast<int>(h_.size()));
    if (garch_) {
      h_ = (0.1 + 0.15 * g_prev_.array().square() + 0.75 * h_.array()).matrix();
      g = g.cwiseProduct(h_.cwiseSqrt());
      g_prev_ = g;
    }
    return g;
  }

 private:
  bool garch_;
  Eigen::VectorXd h_;
  Eigen::VectorXd g_prev_;
};

// One replication of the constant VAR `d` (mc::SimulateVar, kObservations x n after the burn-in)
// with errors e_t = L g_t, each then changed in place by change(obs, &e) where obs is the
// observation index after the burn-in (negative during it). The kept errors go into *errors.
template <typename ErrorChange>
Eigen::MatrixXd SimulateWithErrors(const VarDesign& d, bool garch, mc::GaussianSource* source,
                                   Eigen::MatrixXd* errors, ErrorChange change) {
  const int n = static_cast<int>(d.c.size());
  ShockLaw shocks(n, garch);
  errors->resize(kObservations, n);
  int t = 0;
  auto law = [&](const Eigen::MatrixXd&, mc::GaussianSource* s) {
    Eigen::VectorXd e = d.chol * shocks.Draw(s);
    const int obs = t - kBurnIn;
    change(obs, &e);
    if (obs >= 0) errors->row(obs) = e.transpose();
    ++t;
    return e;
  };
  return mc::SimulateVar(d.a, d.c, kBurnIn, kObservations, source, law);
}

// One replication of a VAR(2) whose law switches from `before` to `after` (coefficients and
// constant; the errors stay L g_t of `before`) at observation index change_obs (-1: never):
// kObservations x n after the burn-in. y_t = c + A1 y_{t-1} + A2 y_{t-2} + L g_t.
inline Eigen::MatrixXd SimulateSwitchingVar(const VarDesign& before, const VarDesign& after,
                                            int change_obs, bool garch,
                                            mc::GaussianSource* source) {
  const int n = static_cast<int>(before.c.size());
  ShockLaw shocks(n, garch);
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(kObservations, n);
  Eigen::VectorXd lag1 = Eigen::VectorXd::Zero(n), lag2 = Eigen::VectorXd::Zero(n);
  for (int t = -kBurnIn; t < kObservations; ++t) {
    const Eigen::VectorXd g = shocks.Draw(source);
    const VarDesign& d = change_obs >= 0 && t >= change_obs ? after : before;
    const Eigen::VectorXd yt = d.c + d.a[0] * lag1 + d.a[1] * lag2 + before.chol * g;
    lag2 = lag1;
    lag1 = yt;
    if (t >= 0) y.row(t) = yt.transpose();
  }
  return y;
}

// The (1 - alpha) quantile the way the engine sets simulated thresholds: the level that at most
// floor(alpha N) of the N values reach.
inline double UpperQuantile(std::vector<double> v, double alpha) {
  std::sort(v.begin(), v.end());
  const auto allowed = static_cast<std::size_t>(std::floor(alpha * v.size() + 1e-9));
  return v[v.size() - std::max<std::size_t>(allowed, 1)];
}

// Order statistic ceil(q N) (common practice); +inf entries are undetected runs.
inline double Quantile(std::vector<double> v, double q) {
  std::sort(v.begin(), v.end());
  const auto idx = static_cast<std::size_t>(std::ceil(q * v.size())) - 1;
  return v[std::min(idx, v.size() - 1)];
}

// Page's CUSUM on supplied log-likelihood-ratio increments, with its running maximum and the
// first row at or above a threshold (0: none).
class PageCusum {
 public:
  explicit PageCusum(double threshold = kNever) : threshold_(threshold) {}
  void Add(double llr, int row) {
    s_ = std::max(0.0, s_ + llr);
    max_ = std::max(max_, s_);
    if (alarm_ == 0 && s_ >= threshold_) alarm_ = row;
  }
  double statistic() const { return s_; }
  double maximum() const { return max_; }
  int alarm() const { return alarm_; }

 private:
  double threshold_;
  double s_ = 0.0;
  double max_ = 0.0;
  int alarm_ = 0;
};

// The log-likelihood ratio of one Gaussian observation under the post-change against the
// pre-change law with a common Omega: (e0' Omega^{-1} e0 - e1' Omega^{-1} e1) / 2, e0 and e1 the
// errors under the two laws. omega_inv: Omega^{-1}.
inline double GaussianLlr(const Eigen::Ref<const Eigen::VectorXd>& e0,
                          const Eigen::Ref<const Eigen::VectorXd>& e1,
                          const Eigen::Ref<const Eigen::MatrixXd>& omega_inv) {
  return 0.5 * (e0.dot(omega_inv * e0) - e1.dot(omega_inv * e1));
}

// Detection delays of one rule over replications with a change at a known row. Record() takes
// the first alarm row (0: none): an alarm before the change row is a false alarm, counted apart;
// otherwise the delay is alarm - change + offset (offset 0: flagged on the change row = 0;
// offset 1: the change row counts as 1), +inf when undetected.
struct DelaySample {
  double offset = 0.0;
  std::vector<double> delays;
  int early = 0;

  void Record(int alarm_row, int change_row) {
    if (alarm_row > 0 && alarm_row < change_row) {
      ++early;
    } else {
      delays.push_back(alarm_row > 0 ? alarm_row - change_row + offset : kNever);
    }
  }
  double Median() const { return Quantile(delays, 0.5); }
  double P90() const { return Quantile(delays, 0.9); }
  std::int64_t Undetected() const { return std::count(delays.begin(), delays.end(), kNever); }
  double DetectedShare() const {
    return delays.empty() ? 0.0 : 1.0 - static_cast<double>(Undetected()) / delays.size();
  }
};

// One line per rule for the delay summary (tests/bench/run_delay_summary.sh reads these):
//   delay_summary.<change>/<rule> = median M, p90 P, oracle median O, ratio M/O (N runs, E
//   alarmed before the change, U undetected)
inline void ReportDelaySummary(const std::string& change, const std::string& rule_name,
                               const DelaySample& rule, const DelaySample& oracle) {
  mc::Report("delay_summary." + change + "/" + rule_name,
             "median " + mc::FormatNumber(rule.Median()) + ", p90 " + mc::FormatNumber(rule.P90()) +
                 ", oracle median " + mc::FormatNumber(oracle.Median()) + ", ratio " +
                 mc::FormatNumber(rule.Median() / oracle.Median(), 3) + " (" +
                 std::to_string(rule.delays.size()) + " runs, " + std::to_string(rule.early) +
                 " alarmed before the change, " + std::to_string(rule.Undetected()) +
                 " undetected)");
}

}  // namespace rimwatch::calibration
