#include "rimwatch/engine/volatility_monitor.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <iomanip>
#include <sstream>
#include <utility>

#include "rimwatch/engine/cusum.h"
#include "rimwatch/engine/random.h"

namespace rimwatch {
namespace {

std::string Fixed(double x, int digits) {
  std::ostringstream out;
  out << std::fixed << std::setprecision(digits) << x;
  return out.str();
}

// Standard normals by the ziggurat method with 256 layers (Marsaglia & Tsang 2000, "The
// ziggurat method for generating random variables", J. Stat. Softw. 5(8); Marsaglia 1964 for the
// tail beyond r), driven by DeterministicRandom. One 64-bit draw gives the layer (low 8 bits)
// and a signed uniform (top 53 bits); about 99% of draws end at the first comparison, so a draw
// costs a few nanoseconds instead of a logarithm. The tables come from std::exp, std::log and
// std::sqrt at construction, so the sequence is fixed for a given platform's libm.
class ZigguratNormal {
 public:
  explicit ZigguratNormal(std::uint64_t seed) : random_(seed) {
    // Layers of equal area v under f(x) = exp(-x^2 / 2); x_[1] = r, x_[256] = 0, and the base
    // strip (rectangle below f(r) plus the tail) has virtual width x_[0] = v / f(r).
    constexpr double kR = 3.6541528853610088;
    constexpr double kV = 4.92867323399e-3;
    x_[0] = kV / Density(kR);
    x_[1] = kR;
    for (int i = 1; i < kLayers - 1; ++i) {
      x_[i + 1] = std::sqrt(-2.0 * std::log(kV / x_[i] + Density(x_[i])));
    }
    x_[kLayers] = 0.0;
    for (int i = 0; i <= kLayers; ++i) f_[i] = Density(x_[i]);
    for (int i = 0; i < kLayers; ++i) ratio_[i] = x_[i + 1] / x_[i];
  }

  double Next() {
    for (;;) {
      const std::uint64_t bits = random_.Next();
      const int i = static_cast<int>(bits & 0xff);
      // Signed uniform on (-1, 1) from the top 53 bits.
      const double u = (static_cast<double>(bits >> 11) + 0.5) * 0x1.0p-52 - 1.0;
      if (std::abs(u) < ratio_[i]) return u * x_[i];  // inside the layer's inner rectangle
      if (i == 0) return u < 0.0 ? -Tail() : Tail();
      const double z = u * x_[i];
      const double y = f_[i + 1] + random_.Uniform() * (f_[i] - f_[i + 1]);
      if (y < Density(z)) return z;  // in the wedge, under the curve
    }
  }

 private:
  static constexpr int kLayers = 256;
  static double Density(double x) { return std::exp(-0.5 * x * x); }
  // |z| given |z| > r (Marsaglia 1964): a = -ln(U1) / r, b = -ln(U2) until 2 b >= a^2.
  double Tail() {
    constexpr double kR = 3.6541528853610088;
    for (;;) {
      const double a = -std::log(random_.Uniform()) / kR;
      const double b = -std::log(random_.Uniform());
      if (2.0 * b >= a * a) return kR + a;
    }
  }

  DeterministicRandom random_;
  double x_[kLayers + 1];
  double f_[kLayers + 1];
  double ratio_[kLayers];
};

// Eigenvalues lambda_j of S^{-1}, S the sample covariance (mean removed, divisor m - 1) of m
// N(0, I_n) vectors. Then z' S^{-1} z = sum_j lambda_j g_j^2 with g = Q'z ~ N(0, I_n) for the
// eigenvectors Q of S, so a monitored row costs n squared normals.
Eigen::VectorXd TrainingEigenvalues(int n, std::int64_t m, ZigguratNormal* source) {
  if (m == 0) return Eigen::VectorXd::Ones(n);  // Omega known
  Eigen::VectorXd sum = Eigen::VectorXd::Zero(n);
  Eigen::MatrixXd cross = Eigen::MatrixXd::Zero(n, n);
  Eigen::VectorXd z(n);
  for (std::int64_t t = 0; t < m; ++t) {
    for (int j = 0; j < n; ++j) z[j] = source->Next();
    sum += z;
    cross.selfadjointView<Eigen::Lower>().rankUpdate(z);
  }
  const double mm = static_cast<double>(m);
  Eigen::MatrixXd s = cross.selfadjointView<Eigen::Lower>();
  s = (s - sum * sum.transpose() / mm) / (mm - 1.0);
  const Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> eig(s, Eigen::EigenvaluesOnly);
  return eig.eigenvalues().cwiseInverse();
}

// Index of the order statistic used as the (1 - alpha) quantile of P sorted maxima: the
// ceil((1 - alpha) P)-th smallest, so at most floor(alpha P) paths lie above it.
std::size_t QuantileIndex(double alpha, std::size_t paths) {
  const double rank = std::ceil((1.0 - alpha) * static_cast<double>(paths) - 1e-9);
  return static_cast<std::size_t>(std::clamp(rank, 1.0, static_cast<double>(paths))) - 1;
}

}  // namespace

bool VolatilityMonitorOptions::IsValid(int n, std::string* why) const {
  std::ostringstream msg;
  if (training < static_cast<std::int64_t>(n) + 10) {
    msg << "training = " << training << ": need at least n + 10 = " << n + 10
        << " recursive residual vectors";
  } else if (horizon < 1) {
    msg << "horizon = " << horizon << ": must be >= 1 row";
  } else if (!(false_alarm > 0.0 && false_alarm <= 0.5)) {
    msg << "false_alarm = " << false_alarm << ": must lie in (0, 0.5]";
  } else if (!(warn_false_alarm >= false_alarm && warn_false_alarm <= 0.9)) {
    msg << "warn_false_alarm = " << warn_false_alarm << ": must lie in [false_alarm, 0.9]";
  } else if (!(delta > 0.0 && delta != 1.0 && std::isfinite(delta))) {
    msg << "delta = " << delta << ": must be finite, > 0 and != 1";
  } else if (!(false_alarm * calibration_paths >= 20.0)) {
    msg << "calibration_paths = " << calibration_paths
        << ": need false_alarm * calibration_paths >= 20 simulated exceedances";
  } else {
    return true;
  }
  if (why != nullptr) *why = msg.str();
  return false;
}

PageThresholds SimulatePageThresholds(int n, const VolatilityMonitorOptions& options) {
  const double constant = -0.5 * n * std::log(options.delta);
  const double slope = 0.5 * (1.0 - 1.0 / options.delta);
  ZigguratNormal source(options.seed);
  const auto paths = static_cast<std::size_t>(options.calibration_paths);
  std::vector<double> maxima(paths);
  for (std::size_t p = 0; p < paths; ++p) {
    const Eigen::VectorXd lambda = TrainingEigenvalues(n, options.training, &source);
    double cusum = 0.0;
    double highest = 0.0;
    for (std::int64_t t = 0; t < options.horizon; ++t) {
      double s = 0.0;
      for (int j = 0; j < n; ++j) {
        const double g = source.Next();
        s += lambda[j] * g * g;
      }
      cusum = std::max(0.0, cusum + constant + slope * s);
      highest = std::max(highest, cusum);
    }
    maxima[p] = highest;
  }
  std::sort(maxima.begin(), maxima.end());
  PageThresholds h;
  h.critical = maxima[QuantileIndex(options.false_alarm, paths)];
  h.warn = maxima[QuantileIndex(options.warn_false_alarm, paths)];
  return h;
}

VolatilityMonitor::VolatilityMonitor(std::vector<std::string> variables,
                                     VolatilityMonitorOptions options)
    : variables_(std::move(variables)), options_(options) {
  const int n = equations();
  thresholds_ = SimulatePageThresholds(n, options_);
  llr_constant_ = -0.5 * n * std::log(options_.delta);
  llr_slope_ = 0.5 * (1.0 - 1.0 / options_.delta);
  Reset();
}

void VolatilityMonitor::Reset() {
  const int n = equations();
  count_ = 0;
  armed_ = false;
  degenerate_ = false;
  mean_ = Eigen::VectorXd::Zero(n);
  comoment_ = Eigen::MatrixXd::Zero(n, n);
  omega_ = Eigen::MatrixXd::Zero(n, n);
  chol_ = Eigen::MatrixXd::Zero(n, n);
  work_ = Eigen::VectorXd::Zero(n);
  cusum_ = 0.0;
  excursion_rows_ = 0;
  excursion_ratio_ = Eigen::VectorXd::Zero(n);
}

Status VolatilityMonitor::Observe(const UpdateResult& update, MonitorReading* reading) {
  Eigen::VectorXd w;
  if (!RecursiveResidual(update, &w)) {
    *reading = MonitorReading();
    reading->explanation =
        "No recursive residual this row (estimator warming up or refused the "
        "row); the volatility monitor skipped it.";
    return Status::Ok();
  }
  return Observe(w, reading);
}

Status VolatilityMonitor::Observe(const Eigen::Ref<const Eigen::VectorXd>& w,
                                  MonitorReading* reading) {
  reading->armed = false;
  if (w.size() != equations()) {
    reading->explanation = "Volatility monitor: wrong residual size.";
    return Status::InvalidArgument("recursive residual has " + std::to_string(w.size()) +
                                   " entries; the model has " + std::to_string(equations()) +
                                   " equations");
  }
  for (int i = 0; i < equations(); ++i) {
    if (!std::isfinite(w[i])) {
      reading->explanation = "Volatility monitor: non-finite residual refused.";
      return Status::NonFinite("recursive residual of '" + variables_[i] +
                               "' is not finite; volatility monitor state unchanged");
    }
  }
  ++count_;
  if (count_ <= options_.training) {
    // Welford update of the mean and the co-moment matrix (Welford 1962, Technometrics 4).
    work_ = w - mean_;
    mean_ += work_ / static_cast<double>(count_);
    comoment_.noalias() += work_ * (w - mean_).transpose();
    if (count_ == options_.training) FinishTraining();
  } else if (armed_) {
    UpdateCusum(w);
  }
  if (degenerate_) {
    reading->explanation =
        "Volatility monitor cannot arm: the training forecast-error covariance "
        "is not positive definite.";
    return Status::Unavailable(
        "training covariance of the recursive residuals is not positive definite; the volatility "
        "monitor stays unarmed until reset");
  }
  Fill(reading);
  return Status::Ok();
}

void VolatilityMonitor::FinishTraining() {
  omega_ = comoment_ / static_cast<double>(options_.training - 1);
  omega_ = 0.5 * (omega_ + omega_.transpose()).eval();
  const Eigen::LLT<Eigen::MatrixXd> llt(omega_);
  if (llt.info() != Eigen::Success || !omega_.allFinite()) {
    degenerate_ = true;
    return;
  }
  chol_ = llt.matrixL();
  // L_ii^2 is the variance of equation i's error left after the earlier equations; a negligible
  // share of Omega_ii means the errors are collinear to working accuracy.
  constexpr double kCollinearShare = 1e-12;
  for (int i = 0; i < equations(); ++i) {
    if (!(chol_(i, i) * chol_(i, i) > kCollinearShare * omega_(i, i))) {
      degenerate_ = true;
      return;
    }
  }
  armed_ = true;
}

void VolatilityMonitor::UpdateCusum(const Eigen::Ref<const Eigen::VectorXd>& w) {
  work_ = w;
  chol_.triangularView<Eigen::Lower>().solveInPlace(work_);  // u = L^{-1} w
  const double s = work_.squaredNorm();
  cusum_ = std::max(0.0, cusum_ + llr_constant_ + llr_slope_ * s);
  if (cusum_ > 0.0) {
    ++excursion_rows_;
    excursion_ratio_.array() += w.array().square() / omega_.diagonal().array();
  } else {
    excursion_rows_ = 0;
    excursion_ratio_.setZero();
  }
}

void VolatilityMonitor::Fill(MonitorReading* reading) const {
  if (!armed_ || count_ <= options_.training) {
    *reading = MonitorReading();
    reading->explanation = "Volatility monitor training: " + std::to_string(count_) + " of " +
                           std::to_string(options_.training) + " recursive residuals.";
    return;
  }
  reading->armed = true;
  reading->statistic = cusum_ / thresholds_.critical;
  reading->critical = 1.0;
  reading->warn = thresholds_.warn / thresholds_.critical;
  reading->clear = reading->warn;
  if (reading->statistic < reading->warn) {  // no alert can be raised on this row
    reading->explanation = "Page CUSUM of forecast-error volatility below its warning threshold.";
    return;
  }
  std::ostringstream text;
  const bool rise = options_.delta > 1.0;
  text << "Forecast-error volatility looks " << (rise ? "higher" : "lower")
       << " than in training: the Page CUSUM for a variance x" << Fixed(options_.delta, 2)
       << " stands at " << Fixed(reading->statistic, 2) << " x its critical threshold ("
       << Fixed(100.0 * options_.false_alarm, 1) << "% chance of any false alarm within "
       << options_.horizon << " rows)";
  if (excursion_rows_ > 0) {
    Eigen::Index top = 0;
    const Eigen::VectorXd mean_ratio = excursion_ratio_ / static_cast<double>(excursion_rows_);
    if (rise) {
      mean_ratio.maxCoeff(&top);
    } else {
      mean_ratio.minCoeff(&top);
    }
    text << "; over the last " << excursion_rows_ << " rows the squared forecast errors of '"
         << variables_[top] << "' averaged " << Fixed(mean_ratio[top], 2)
         << " x their training variance";
  }
  text << "; check for a volatility regime change or a cluster of outliers.";
  reading->explanation = text.str();
}

}  // namespace rimwatch
