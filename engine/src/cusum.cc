#include "rimwatch/engine/cusum.h"

#include <algorithm>
#include <boost/math/distributions/normal.hpp>
#include <boost/math/tools/toms748_solve.hpp>
#include <cmath>
#include <cstdint>
#include <iomanip>
#include <sstream>
#include <utility>

namespace rimwatch {
namespace {

const boost::math::normal_distribution<double> kStandardNormal(0.0, 1.0);

double NormalCdf(double x) { return boost::math::cdf(kStandardNormal, x); }
double NormalSurvival(double x) {
  return boost::math::cdf(boost::math::complement(kStandardNormal, x));
}
double NormalDensity(double x) { return boost::math::pdf(kStandardNormal, x); }

bool AllFinite(const Eigen::Ref<const Eigen::VectorXd>& v, Eigen::Index* bad) {
  for (Eigen::Index i = 0; i < v.size(); ++i) {
    if (!std::isfinite(v[i])) {
      *bad = i;
      return false;
    }
  }
  return true;
}

std::string Fixed(double x, int digits) {
  std::ostringstream out;
  out << std::fixed << std::setprecision(digits) << x;
  return out.str();
}

}  // namespace

bool RecursiveResidual(const UpdateResult& update, Eigen::VectorXd* w) {
  if (!update.status.ok() || !update.has_prediction) return false;
  *w = update.prediction_error / std::sqrt(update.prediction_scale);
  return true;
}

// ---------------------------------------------------------------------------------------------
// Offline test

Status BdeBoundaryConstant(double alpha, double* a) {
  // BDE 1975, Sec. 2.3 (also Harvey 1990, Sec. 2.6): the three published levels.
  if (alpha == 0.01) {
    *a = 1.143;
  } else if (alpha == 0.05) {
    *a = 0.948;
  } else if (alpha == 0.10) {
    *a = 0.850;
  } else {
    std::ostringstream msg;
    msg << "CUSUM significance level " << alpha << ": must be 0.01, 0.05 or 0.10";
    return Status::InvalidArgument(msg.str());
  }
  return Status::Ok();
}

double BdeCrossingProbability(double a) {
  // 2 [1 - Phi(3a) + exp(-4 a^2) Phi(a)]  (BDE 1975, Sec. 2.3).
  if (!(a > 0.0)) return 1.0;
  const double p = 2.0 * (NormalSurvival(3.0 * a) + std::exp(-4.0 * a * a) * NormalCdf(a));
  return std::clamp(p, 0.0, 1.0);
}

double BdeBoundary(double a, std::int64_t j, std::int64_t count) {
  const double root = std::sqrt(static_cast<double>(count));
  return a * root + 2.0 * a * static_cast<double>(j) / root;
}

std::int64_t RecursiveCusum::FirstCrossing(double a) const {
  for (std::int64_t j = 1; j <= count; ++j) {
    if (std::abs(path[j - 1]) > BdeBoundary(a, j, count)) return j;
  }
  return 0;
}

Status ComputeRecursiveCusum(const Eigen::Ref<const Eigen::VectorXd>& w, RecursiveCusum* out) {
  const Eigen::Index count = w.size();
  if (count < 2) {
    return Status::NotEnoughRows("recursive CUSUM needs at least 2 recursive residuals, got " +
                                 std::to_string(count));
  }
  Eigen::Index bad = 0;
  if (!AllFinite(w, &bad)) {
    return Status::NonFinite("recursive residual " + std::to_string(bad + 1) + " of " +
                             std::to_string(count) + " is not finite");
  }
  // sigma-hat^2 = sum (w - mean)^2 / (N - 1): two passes, the mean first.
  const double mean = w.mean();
  const double sigma =
      std::sqrt((w.array() - mean).square().sum() / static_cast<double>(count - 1));
  if (!(sigma > 0.0)) {
    return Status::Unavailable("recursive residuals have zero spread; the CUSUM is undefined");
  }
  out->count = count;
  out->sigma = sigma;
  out->path.resize(count);
  double running = 0.0;
  out->statistic = 0.0;
  out->statistic_at = 1;
  const double root = std::sqrt(static_cast<double>(count));
  for (Eigen::Index j = 1; j <= count; ++j) {
    running += w[j - 1];
    out->path[j - 1] = running / sigma;
    // |W| / (sqrt(N) (1 + 2 j / N)) is the a of the lines through this point.
    const double touch = std::abs(out->path[j - 1]) /
                         (root * (1.0 + 2.0 * static_cast<double>(j) / static_cast<double>(count)));
    if (touch > out->statistic) {
      out->statistic = touch;
      out->statistic_at = j;
    }
  }
  out->p_value = BdeCrossingProbability(out->statistic);
  return Status::Ok();
}

// ---------------------------------------------------------------------------------------------
// Live monitor: critical values

double CswCriticalValue(double alpha) {
  // g(c) = 2 [1 - Phi(c) + c phi(c)] - alpha falls strictly from 1 - alpha at c = 0
  // (g'(c) = -2 c^2 phi(c)) to -alpha, so [0, 40] brackets the single root.
  auto g = [alpha](double c) { return 2.0 * (NormalSurvival(c) + c * NormalDensity(c)) - alpha; };
  std::uintmax_t iterations = 200;
  const auto root = boost::math::tools::toms748_solve(
      g, 0.0, 40.0, g(0.0), g(40.0), boost::math::tools::eps_tolerance<double>(50), iterations);
  return 0.5 * (root.first + root.second);
}

double AfterTrainingCriticalValue(double alpha) { return std::sqrt(-2.0 * std::log(alpha)); }

const char* CusumOriginName(CusumOrigin origin) {
  return origin == CusumOrigin::kAfterTraining ? "after_training" : "first_residual";
}

bool CusumMonitorOptions::IsValid(std::string* why) const {
  std::ostringstream msg;
  if (training < 10) {
    msg << "training = " << training << ": need at least 10 recursive residuals";
  } else if (!(false_alarm > 0.0 && false_alarm <= 0.5)) {
    msg << "false_alarm = " << false_alarm << ": must lie in (0, 0.5]";
  } else if (!(warn_false_alarm >= false_alarm && warn_false_alarm <= 0.9)) {
    msg << "warn_false_alarm = " << warn_false_alarm << ": must lie in [false_alarm, 0.9]";
  } else {
    return true;
  }
  if (why != nullptr) *why = msg.str();
  return false;
}

// ---------------------------------------------------------------------------------------------
// Live monitor

CusumMonitor::CusumMonitor(std::vector<std::string> variables, CusumMonitorOptions options)
    : variables_(std::move(variables)), options_(options) {
  const double n_eq = static_cast<double>(variables_.size());
  auto critical = [&](double alpha) {
    return options_.origin == CusumOrigin::kAfterTraining ? AfterTrainingCriticalValue(alpha)
                                                          : CswCriticalValue(alpha);
  };
  c_critical_ = critical(options_.false_alarm / n_eq);
  c_warn_ = critical(options_.warn_false_alarm / n_eq);
  Reset();
}

void CusumMonitor::Reset() {
  const Eigen::Index n = static_cast<Eigen::Index>(variables_.size());
  count_ = 0;
  armed_ = false;
  degenerate_ = -1;
  mean_ = Eigen::VectorXd::Zero(n);
  m2_ = Eigen::VectorXd::Zero(n);
  sigma_ = Eigen::VectorXd::Zero(n);
  sums_ = Eigen::VectorXd::Zero(n);
}

double CusumMonitor::Boundary(double c, std::int64_t n) const {
  const double nn = static_cast<double>(n);
  return std::sqrt(nn * (c * c + std::log(nn / static_cast<double>(options_.training))));
}

Status CusumMonitor::Observe(const UpdateResult& update, MonitorReading* reading) {
  Eigen::VectorXd w;
  if (!RecursiveResidual(update, &w)) {
    *reading = MonitorReading();
    reading->explanation =
        "No recursive residual this row (estimator warming up or refused the "
        "row); the CUSUM monitor skipped it.";
    return Status::Ok();
  }
  return Observe(w, reading);
}

Status CusumMonitor::Observe(const Eigen::Ref<const Eigen::VectorXd>& w, MonitorReading* reading) {
  reading->armed = false;
  if (w.size() != equations()) {
    reading->explanation = "CUSUM monitor: wrong residual size.";
    return Status::InvalidArgument("recursive residual has " + std::to_string(w.size()) +
                                   " entries; the model has " + std::to_string(equations()) +
                                   " equations");
  }
  Eigen::Index bad = 0;
  if (!AllFinite(w, &bad)) {
    reading->explanation = "CUSUM monitor: non-finite residual refused.";
    return Status::NonFinite("recursive residual of '" + variables_[bad] +
                             "' is not finite; CUSUM monitor state unchanged");
  }
  ++count_;
  if (count_ <= options_.training) {
    // Welford update of mean and squared deviations (Welford 1962, Technometrics 4).
    const Eigen::VectorXd delta = w - mean_;
    mean_ += delta / static_cast<double>(count_);
    m2_.array() += delta.array() * (w - mean_).array();
    if (options_.origin == CusumOrigin::kFirstResidual) sums_ += w;
    if (count_ == options_.training) FinishTraining();
  } else if (armed_) {
    sums_.array() += w.array() / sigma_.array();
  }
  if (degenerate_ >= 0) {
    reading->explanation = "CUSUM monitor cannot arm: the training forecast errors of '" +
                           variables_[degenerate_] + "' have zero spread.";
    return Status::Unavailable("training recursive residuals of '" + variables_[degenerate_] +
                               "' have zero spread; the CUSUM monitor stays unarmed until reset");
  }
  Fill(reading);
  return Status::Ok();
}

void CusumMonitor::FinishTraining() {
  const double dof = static_cast<double>(options_.training - 1);
  for (int i = 0; i < equations(); ++i) {
    sigma_[i] = std::sqrt(m2_[i] / dof);
    if (!(sigma_[i] > 0.0) || !std::isfinite(sigma_[i])) {
      degenerate_ = i;
      return;
    }
  }
  // kFirstResidual: the raw training sums become standardised sums; kAfterTraining: zero.
  sums_.array() /= sigma_.array();
  armed_ = true;
}

void CusumMonitor::Fill(MonitorReading* reading) const {
  if (!armed_ || count_ <= options_.training) {  // alarms only for n > m
    *reading = MonitorReading();
    reading->explanation = "CUSUM monitor training: " + std::to_string(count_) + " of " +
                           std::to_string(options_.training) + " recursive residuals.";
    return;
  }
  const double crit = Boundary(c_critical_, count_);
  Eigen::Index top = 0;
  const double largest = sums_.cwiseAbs().maxCoeff(&top);
  reading->armed = true;
  reading->statistic = largest / crit;
  reading->critical = 1.0;
  reading->warn = Boundary(c_warn_, count_) / crit;
  reading->clear = reading->warn;
  if (reading->statistic < reading->warn) {  // no alert can be raised on this row
    reading->explanation = "CUSUM of standardised forecast errors inside its warning boundary.";
    return;
  }
  const double s = sums_[top];
  const std::int64_t rows =
      options_.origin == CusumOrigin::kAfterTraining ? count_ - options_.training : count_;
  std::ostringstream text;
  text << "Forecasts of '" << variables_[top] << "' have been persistently too "
       << (s > 0.0 ? "low (outcomes above forecasts)" : "high (outcomes below forecasts)")
       << ": the cumulative sum of its standardised one-step forecast errors over " << rows
       << " rows is " << Fixed(s, 2) << ", " << Fixed(reading->statistic, 2)
       << " x the critical boundary (" << Fixed(100.0 * options_.false_alarm, 1)
       << "% chance of any false alarm, open-ended); check for a level shift or a coefficient "
          "break in that equation.";
  reading->explanation = text.str();
}

}  // namespace rimwatch
