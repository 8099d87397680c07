#include "rimwatch/engine/constancy.h"

#include <Eigen/Dense>
#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/fisher_f.hpp>
#include <boost/math/tools/roots.hpp>
#include <cmath>
#include <complex>
#include <iomanip>
#include <map>
#include <mutex>
#include <sstream>
#include <utility>

#include "rimwatch/engine/wald.h"

namespace rimwatch {
namespace {

using Complex = std::complex<double>;

// Mathematical constants to double precision (the engine's include rules leave out <numbers>).
constexpr double kPi = 3.14159265358979323846;
constexpr double kLn2 = 0.69314718055994530942;
constexpr double kSqrt2 = 1.41421356237309504880;

// Relative pivot floor for V (and V_i): a Cholesky pivot below this fraction of the largest
// diagonal root means a score direction with no variation (rank deficiency). 1e-10 as in
// restriction_monitor.cc.
constexpr double kPivotFraction = 1e-10;

// Columns per chunk when streaming partial sums (bounds memory at n k x kChunk doubles).
constexpr Eigen::Index kChunk = 256;

std::string Fmt(double x, int digits = 4) {
  std::ostringstream out;
  out << std::setprecision(digits) << x;
  return out.str();
}

// ---------------------------------------------------------------------------------------------
// The law of sum_{j <= p} int B_j^2.

// g(u) = log(sin(w) / w) with w = u (1 + i) = sqrt(2 i t), t = u^2, on the branch continuous
// from g(0) = 0. For u >= 1 it is written as
//   sin w = (i / 2) e^{-i w} (1 - e^{2 i w}),  |e^{2 i w}| = e^{-2u} < 1,
//   g = u - i u + log(1 - e^{2 i w}) - ln 2 + i pi / 2 - ln(sqrt(2) u) - i pi / 4,
// which needs no phase unwrapping (the principal log of 1 - e^{2iw} stays in the right
// half-plane); below u = 1 the phase of sin(w)/w is small and the principal log is used.
Complex LogSincOfSqrt(double u) {
  const Complex w(u, u);
  if (u < 1.0) {
    if (u == 0.0) return Complex(0.0, 0.0);
    return std::log(std::sin(w) / w);
  }
  const Complex e2iw = std::exp(Complex(-2.0 * u, 2.0 * u));
  return Complex(u - kLn2 - std::log(kSqrt2 * u), -u + 0.25 * kPi) + std::log(1.0 - e2iw);
}

// 2 Im[exp(-i u^2 x) phi(u^2)] / u, phi = exp(-(p/2) g): the Gil-Pelaez integrand after t = u^2.
double Integrand(double u, double x, int p) {
  if (u == 0.0) return 0.0;
  const Complex g = LogSincOfSqrt(u);
  const double half_p = 0.5 * p;
  const double modulus = std::exp(-half_p * g.real());
  return 2.0 * modulus * std::sin(-u * u * x - half_p * g.imag()) / u;
}

// 16-point Gauss-Legendre nodes and weights on [-1, 1] (Abramowitz & Stegun 1964, Handbook of
// Mathematical Functions, Table 25.4; digits as numpy.polynomial.legendre.leggauss(16) prints
// them).
constexpr int kNodes = 8;  // positive half
constexpr double kGaussX[kNodes] = {0.09501250983763745, 0.2816035507792589, 0.45801677765722737,
                                    0.6178762444026438,  0.755404408355003,  0.8656312023878318,
                                    0.9445750230732326,  0.9894009349916499};
constexpr double kGaussW[kNodes] = {0.18945061045506859,  0.1826034150449236,  0.16915651939500262,
                                    0.14959598881657676,  0.12462897125553403, 0.09515851168249259,
                                    0.062253523938647706, 0.027152459411754037};

double GaussPanel(double a, double b, double x, int p) {
  const double mid = 0.5 * (a + b);
  const double half = 0.5 * (b - a);
  double sum = 0.0;
  for (int i = 0; i < kNodes; ++i) {
    sum += kGaussW[i] *
           (Integrand(mid - half * kGaussX[i], x, p) + Integrand(mid + half * kGaussX[i], x, p));
  }
  return half * sum;
}

// Chernoff bound at s = pi^2 / 4: E exp(s L) = prod (1 - 1/(2 j^2))^{-p/2}
// = (sin(pi/sqrt 2) / (pi/sqrt 2))^{-p/2}, so P(L > x) <= that times exp(-pi^2 x / 4).
double ChernoffBound(double x, int p) {
  const double c = kPi / kSqrt2;
  return std::pow(std::sin(c) / c, -0.5 * p) * std::exp(-0.25 * kPi * kPi * x);
}

// Upper limit: (p/2) Re g(u^2) >= 40 makes the integrand below e^{-40} / u.
double UpperLimit(int p) {
  double u = 1.0;
  while (0.5 * p * LogSincOfSqrt(u).real() < 40.0) u *= 1.25;
  return u;
}

}  // namespace

double NyblomSurvival(double x, int p) {
  if (!(x > 0.0)) return 1.0;
  if (std::isinf(x)) return 0.0;
  const double bound = ChernoffBound(x, p);
  if (bound <= 1e-10) return bound;  // absolute error below 1e-10
  const double top = UpperLimit(p);
  // Panels short enough that the phase u^2 x + (p/2) Im g moves by at most 2 pi across one (its
  // derivative is at most 2 u x + p / 2, as |d Im g / du| <= 1): a 16-point rule is exact for
  // polynomials of degree 31, and the Taylor remainder of a sine over 2 pi at that degree is
  // below 1e-15.
  double integral = 0.0;
  for (double a = 0.0; a < top;) {
    const double rate = 2.0 * (a + 1.0) * x + 0.5 * p + 1.0;
    const double b = std::min(top, a + std::min(1.0, 2.0 * kPi / rate));
    integral += GaussPanel(a, b, x, p);
    a = b;
  }
  return std::clamp(0.5 + integral / kPi, 0.0, 1.0);
}

double NyblomCriticalValue(double alpha, int p) {
  static std::mutex mutex;
  static auto* cache = new std::map<std::pair<double, int>, double>;
  {
    std::lock_guard<std::mutex> lock(mutex);
    auto it = cache->find({alpha, p});
    if (it != cache->end()) return it->second;
  }
  auto f = [&](double x) { return NyblomSurvival(x, p) - alpha; };
  // Bracket: mean p / 6 upwards by doubling until the survival falls below alpha.
  double lo = 1e-6, hi = std::max(0.5, p / 3.0);
  while (f(hi) > 0.0) {
    lo = hi;
    hi *= 2.0;
  }
  std::uintmax_t iterations = 200;
  const auto root = boost::math::tools::toms748_solve(
      f, lo, hi, boost::math::tools::eps_tolerance<double>(34), iterations);
  const double value = 0.5 * (root.first + root.second);
  std::lock_guard<std::mutex> lock(mutex);
  cache->emplace(std::make_pair(alpha, p), value);
  return value;
}

// ---------------------------------------------------------------------------------------------
// Nyblom-Hansen statistic

namespace {

// Lower Cholesky factor of a symmetric positive definite v; false when a pivot is negligible.
bool Factor(const Eigen::MatrixXd& v, Eigen::MatrixXd* l) {
  Eigen::LLT<Eigen::MatrixXd> llt(v);
  if (llt.info() != Eigen::Success) return false;
  *l = llt.matrixL();
  const double top = std::sqrt(v.diagonal().maxCoeff());
  return l->diagonal().minCoeff() > kPivotFraction * top;
}

// (1/T^2) sum_t S_t' V^{-1} S_t for the score rows [first, first + size) of g_t = e_t (x) x_t,
// streaming the partial sums in chunks.
double Statistic(const Eigen::Ref<const Eigen::MatrixXd>& x,
                 const Eigen::Ref<const Eigen::MatrixXd>& e, int first_eq, int eqs,
                 const Eigen::MatrixXd& l) {
  const Eigen::Index k = x.rows(), t_rows = x.cols();
  const Eigen::Index size = k * eqs;
  Eigen::VectorXd carry = Eigen::VectorXd::Zero(size);
  Eigen::MatrixXd s(size, kChunk);
  double total = 0.0;
  for (Eigen::Index start = 0; start < t_rows; start += kChunk) {
    const Eigen::Index c = std::min(kChunk, t_rows - start);
    for (Eigen::Index t = 0; t < c; ++t) {
      for (int a = 0; a < eqs; ++a) {
        carry.segment(a * k, k) += e(first_eq + a, start + t) * x.col(start + t);
      }
      s.col(t) = carry;
    }
    total += l.triangularView<Eigen::Lower>().solve(s.leftCols(c)).squaredNorm();
  }
  const auto td = static_cast<double>(t_rows);
  return total / (td * td);
}

// V = (1/T) sum g g' for equations [first, first + eqs).
Eigen::MatrixXd ScoreCovariance(const Eigen::Ref<const Eigen::MatrixXd>& x,
                                const Eigen::Ref<const Eigen::MatrixXd>& e, int first_eq, int eqs) {
  const Eigen::Index k = x.rows();
  const auto td = static_cast<double>(x.cols());
  Eigen::MatrixXd v(k * eqs, k * eqs);
  for (int a = 0; a < eqs; ++a) {
    for (int b = 0; b <= a; ++b) {
      const Eigen::ArrayXd w = e.row(first_eq + a).array() * e.row(first_eq + b).array();
      const Eigen::MatrixXd block = (x * w.matrix().asDiagonal()) * x.transpose() / td;
      v.block(a * k, b * k, k, k) = block;
      v.block(b * k, a * k, k, k) = block.transpose();
    }
  }
  return v;
}

}  // namespace

Status NyblomHansenStatistic(const Eigen::Ref<const Eigen::MatrixXd>& x,
                             const Eigen::Ref<const Eigen::MatrixXd>& e, NyblomResult* out,
                             NyblomPValues p_values) {
  const Eigen::Index k = x.rows(), t_rows = x.cols();
  const auto n = static_cast<int>(e.rows());
  if (e.cols() != t_rows || k < 1 || n < 1) {
    return Status::InvalidArgument("Nyblom-Hansen: x is k x T and e is n x T for the same T");
  }
  if (!x.allFinite() || !e.allFinite()) {
    return Status::NonFinite("Nyblom-Hansen: regressors and residuals must be finite");
  }
  const auto nk = static_cast<int>(n * k);
  if (t_rows <= nk) {
    return Status::NotEnoughRows("Nyblom-Hansen: needs more rows (" + std::to_string(t_rows) +
                                 ") than coefficients (" + std::to_string(nk) + ")");
  }
  NyblomResult r;
  r.rows = t_rows;
  r.parameters = nk;
  Eigen::MatrixXd l;
  if (!Factor(ScoreCovariance(x, e, 0, n), &l)) {
    return Status::RankDeficient(
        "Nyblom-Hansen: the score covariance V is singular (a regressor without variation, or "
        "an equation fitted exactly)");
  }
  const bool with_p = p_values == NyblomPValues::kCompute;
  r.joint = Statistic(x, e, 0, n, l);
  r.joint_p_value = with_p ? NyblomSurvival(r.joint, nk) : std::nan("");
  r.equation.resize(n);
  if (with_p) r.equation_p_value.resize(n);
  for (int i = 0; i < n; ++i) {
    if (!Factor(ScoreCovariance(x, e, i, 1), &l)) {
      return Status::RankDeficient("Nyblom-Hansen: the score covariance of equation " +
                                   std::to_string(i + 1) + " is singular");
    }
    r.equation[i] = Statistic(x, e, i, 1, l);
    if (with_p) r.equation_p_value[i] = NyblomSurvival(r.equation[i], static_cast<int>(k));
  }
  *out = std::move(r);
  return Status::Ok();
}

Status NyblomHansenTest(const VarEstimator& window, NyblomResult* out, NyblomPValues p_values) {
  const WindowOptions& w = window.spec().window;
  if (w.kind == WindowKind::kForgetting && w.lambda < 1.0) {
    return Status::Unavailable(
        "Nyblom-Hansen needs equally weighted rows; the forgetting window weights them unequally");
  }
  const RowBuffer& buf = window.buffer();
  if (static_cast<std::int64_t>(buf.size()) < window.rows_in_window()) {
    return Status::Unavailable("Nyblom-Hansen: the row buffer holds " + std::to_string(buf.size()) +
                               " of the window's " + std::to_string(window.rows_in_window()) +
                               " rows");
  }
  Eigen::MatrixXd phi;
  Status st = window.Coefficients(&phi);
  if (!st.ok()) return st;
  const Eigen::MatrixXd z = buf.Ordered();
  const int k = window.k();
  const Eigen::MatrixXd e = z.bottomRows(window.n()) - phi * z.topRows(k);
  return NyblomHansenStatistic(z.topRows(k), e, out, p_values);
}

// ---------------------------------------------------------------------------------------------
// Equality test

double EqualityCriticalValue(double alpha, int p, double nu) {
  const double df2 = nu - p + 1.0;
  if (!(df2 > 0.0)) {
    return boost::math::quantile(boost::math::complement(boost::math::chi_squared(p), alpha));
  }
  const boost::math::fisher_f f(p, df2);
  return boost::math::quantile(boost::math::complement(f, alpha)) * p * nu / df2;
}

Status EqualityWaldTest(const Eigen::Ref<const Eigen::VectorXd>& theta_ref,
                        const Eigen::Ref<const Eigen::MatrixXd>& v_ref,
                        const Eigen::Ref<const Eigen::VectorXd>& theta_rec,
                        const Eigen::Ref<const Eigen::MatrixXd>& v_rec, double nu,
                        EqualityResult* out) {
  const Eigen::Index p = theta_ref.size();
  if (p < 1 || theta_rec.size() != p || v_ref.rows() != p || v_ref.cols() != p ||
      v_rec.rows() != p || v_rec.cols() != p) {
    return Status::InvalidArgument("equality test: thetas of one size p and p x p covariances");
  }
  if (!theta_ref.allFinite() || !theta_rec.allFinite() || !v_ref.allFinite() ||
      !v_rec.allFinite()) {
    return Status::NonFinite("equality test: inputs must be finite");
  }
  const Eigen::MatrixXd v = 0.5 * (v_ref + v_ref.transpose() + v_rec + v_rec.transpose());
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(v);
  if (es.info() != Eigen::Success) return Status::Numerical("eigen solver failed on V_ref + V_rec");
  const double top = es.eigenvalues().maxCoeff();
  // The rank rule of WaldTest (wald.cc): eigenvalues below 1e-12 p top count as zero.
  if (!(top > 0.0) || es.eigenvalues().minCoeff() <= 1e-12 * static_cast<double>(p) * top) {
    return Status::RankDeficient("equality test: V_ref + V_rec is singular");
  }
  const Eigen::VectorXd proj = es.eigenvectors().transpose() * (theta_rec - theta_ref);
  EqualityResult r;
  r.statistic = (proj.array().square() / es.eigenvalues().array()).sum();
  r.df = static_cast<int>(p);
  r.p_value = ChiSquaredSurvival(r.statistic, static_cast<double>(p));
  r.dof = nu;
  const double df2 = nu - static_cast<double>(p) + 1.0;
  r.has_f = df2 > 0.0;
  r.f_p_value = r.p_value;
  if (r.has_f) {
    r.f_df2 = df2;
    r.f_statistic = r.statistic * df2 / (nu * static_cast<double>(p));
    r.f_p_value = FSurvival(r.f_statistic, static_cast<double>(p), df2);
  }
  *out = r;
  return Status::Ok();
}

Status EqualityWaldTest(const CovarianceContext& reference, const CovarianceContext& recent,
                        EqualityResult* out) {
  return EqualityWaldTest(reference.theta(), reference.Full(), recent.theta(), recent.Full(),
                          std::min(reference.info().dof, recent.info().dof), out);
}

// ---------------------------------------------------------------------------------------------
// ConstancyMonitor

const char* ConstancyTestName(ConstancyMonitorOptions::Test test) {
  switch (test) {
    case ConstancyMonitorOptions::Test::kNyblomHansen:
      return "nyblom_hansen";
    case ConstancyMonitorOptions::Test::kReferenceEquality:
      return "reference_equality";
  }
  return "?";
}

std::int64_t ConstancyMonitorOptions::Evaluations() const {
  return std::max<std::int64_t>(1, block_rows > 0 ? horizon_rows / block_rows : 1);
}

bool ConstancyMonitorOptions::IsValid(const VarSpec& tracking, std::string* why) const {
  auto fail = [&](const std::string& msg) {
    if (why) *why = msg;
    return false;
  };
  const int k = tracking.k();
  if (training_rows < k + 10) {
    return fail("constancy monitor: training_rows = " + std::to_string(training_rows) +
                " must be >= k + 10 = " + std::to_string(k + 10));
  }
  if (horizon_rows < 1) return fail("constancy monitor: horizon_rows must be >= 1");
  if (block_rows < 1 || block_rows > horizon_rows) {
    return fail("constancy monitor: block_rows = " + std::to_string(block_rows) +
                " must lie in [1, horizon_rows]");
  }
  if (!(false_alarm > 0.0 && false_alarm <= 0.5)) {
    return fail("constancy monitor: false_alarm = " + Fmt(false_alarm) + " must lie in (0, 0.5]");
  }
  if (!(warn_false_alarm >= false_alarm && warn_false_alarm <= 0.9)) {
    return fail("constancy monitor: warn_false_alarm = " + Fmt(warn_false_alarm) +
                " must lie in [false_alarm, 0.9]");
  }
  const WindowOptions& w = tracking.window;
  if (w.kind == WindowKind::kForgetting && w.lambda < 1.0) {
    return fail("constancy monitor: needs equally weighted rows; the tracking window forgets");
  }
  if (w.kind == WindowKind::kSliding &&
      static_cast<std::int64_t>(w.rows) <= static_cast<std::int64_t>(tracking.n()) * k) {
    return fail("constancy monitor: the sliding window (" + std::to_string(w.rows) +
                " rows) must exceed n k = " + std::to_string(tracking.n() * k));
  }
  if (test == Test::kReferenceEquality) {
    if (w.kind != WindowKind::kSliding) {
      return fail(
          "constancy monitor: reference_equality needs a sliding tracking window (the recent "
          "sample must not overlap the reference sample)");
    }
    if (static_cast<std::int64_t>(w.rows) > block_rows) {
      return fail("constancy monitor: reference_equality needs block_rows (" +
                  std::to_string(block_rows) + ") >= the sliding window (" +
                  std::to_string(w.rows) + " rows)");
    }
  }
  return true;
}

Status ConstancyMonitor::Create(const VarSpec& tracking, const ConstancyMonitorOptions& options,
                                ConstancyMonitor* out) {
  std::string why;
  if (!tracking.IsValid(&why)) return Status::InvalidArgument(why);
  if (!options.IsValid(tracking, &why)) return Status::InvalidArgument(why);
  ConstancyMonitor m;
  m.spec_ = tracking;
  m.options_ = options;
  const int p = tracking.n() * tracking.k();
  const auto e = static_cast<double>(options.Evaluations());
  if (options.test == ConstancyMonitorOptions::Test::kNyblomHansen) {
    m.critical_ = NyblomCriticalValue(options.false_alarm / e, p);
    m.warn_ = NyblomCriticalValue(options.warn_false_alarm / e, p);
  } else {
    const double nu = static_cast<double>(tracking.window.rows) - tracking.k();
    m.critical_ = EqualityCriticalValue(options.false_alarm / e, p, nu);
    m.warn_ = EqualityCriticalValue(options.warn_false_alarm / e, p, nu);
  }
  *out = std::move(m);
  return Status::Ok();
}

void ConstancyMonitor::Reset() {
  last_rows_ = 0;
  has_reference_ = false;
  last_ = ConstancyReading();
}

void ConstancyMonitor::Evaluate(const VarEstimator& tracking, std::int64_t j, ConstancyReading* r) {
  r->evaluated = true;
  r->evaluation = j;
  r->within_horizon = j <= options_.Evaluations();
  if (options_.test == ConstancyMonitorOptions::Test::kNyblomHansen) {
    r->status = NyblomHansenTest(tracking, &r->nyblom, NyblomPValues::kSkip);
    r->alarm.statistic = r->nyblom.joint;
    return;
  }
  if (!has_reference_) {
    r->status = Status::Unavailable("no reference snapshot for this evaluation");
    return;
  }
  if (tracking.rows_in_window() != static_cast<std::int64_t>(spec_.window.rows)) {
    r->status = Status::NotEnoughRows("the tracking window is not full yet");
    return;
  }
  CovarianceContext recent;
  r->status = CovarianceContext::Create(tracking, options_.covariance, &recent);
  if (r->status.ok()) {
    r->status = EqualityWaldTest(reference_theta_, reference_cov_, recent.theta(), recent.Full(),
                                 std::min(reference_dof_, recent.info().dof), &r->equality);
  }
  r->alarm.statistic = r->equality.statistic;
}

void ConstancyMonitor::Fill(ConstancyReading* r) const {
  MonitorReading& a = r->alarm;
  a.armed = r->evaluation > 0 && r->status.ok();
  a.critical = critical_;
  a.warn = warn_;
  a.clear = warn_;
  const auto e = options_.Evaluations();
  if (!a.armed) {  // plain concatenation: a stream costs more than the rest of a quiet row here
    a.explanation = std::string("Parameter constancy (") + ConstancyTestName(options_.test) +
                    "): " +
                    (r->evaluation == 0 ? std::string("waiting for the first block of rows")
                                        : r->status.ToString());
    return;
  }
  // The full text only where an alert can be raised (armed, at or above warn: alert.cc).
  if (!(a.statistic >= warn_)) {
    a.explanation = std::string("Parameter constancy (") + ConstancyTestName(options_.test) +
                    "): below warn at the latest evaluation.";
    return;
  }
  std::ostringstream text;
  if (options_.test == ConstancyMonitorOptions::Test::kNyblomHansen) {
    // Every equation has k coefficients, so the largest statistic has the smallest p-value:
    // only that equation's p-value is computed.
    int worst = 0;
    r->nyblom.equation.maxCoeff(&worst);
    r->nyblom.equation_p_value = Eigen::VectorXd::Constant(r->nyblom.equation.size(), std::nan(""));
    r->nyblom.equation_p_value[worst] = NyblomSurvival(r->nyblom.equation[worst], spec_.k());
    text << "The VAR coefficients look unstable over the last " << r->nyblom.rows
         << " rows: the Nyblom-Hansen statistic is " << Fmt(a.statistic) << " (critical "
         << Fmt(critical_) << " at level " << Fmt(options_.false_alarm / e, 3) << ", split over "
         << e << " evaluations per horizon); equation '" << spec_.variables[worst]
         << "' moved most (p = " << Fmt(r->nyblom.equation_p_value[worst], 3)
         << "); check for a break or a regime change before trusting forecasts.";
  } else {
    text << "The VAR coefficients of the last " << spec_.window.rows
         << " rows differ from the reference sample: the robust Wald statistic is "
         << Fmt(a.statistic) << " on " << r->equality.df << " degrees of freedom (critical "
         << Fmt(critical_) << " at level " << Fmt(options_.false_alarm / e, 3) << ", split over "
         << e << " evaluations per horizon); re-estimate or reset the reference if the change is "
         << "real.";
  }
  a.explanation = text.str();
}

Status ConstancyMonitor::Observe(const VarEstimator& tracking, const VarEstimator& reference,
                                 ConstancyReading* reading) {
  if (tracking.n() != spec_.n() || tracking.k() != spec_.k() || reference.n() != spec_.n() ||
      reference.k() != spec_.k()) {
    return Status::InvalidArgument("constancy monitor: an estimator has another shape");
  }
  if (reference.spec().window.kind != WindowKind::kExpanding) {
    return Status::InvalidArgument("constancy monitor: the reference must be an expanding window");
  }
  const std::int64_t n = reference.rows_in_window();
  if (n == last_rows_ && n > 0) {
    *reading = last_;
    return Status::Ok();
  }
  if (n < last_rows_) Reset();
  last_rows_ = n;
  // The reading is held between evaluations: updated in place, its text rebuilt only when an
  // evaluation changed it (or after Reset, when it is still empty).
  ConstancyReading& r = last_;
  r.evaluated = false;
  const std::int64_t m = options_.training_rows;
  const std::int64_t b = options_.block_rows;
  const std::int64_t armed = n - m;
  if (armed > 0 && armed % b == 0) Evaluate(tracking, armed / b, &r);
  // kReferenceEquality: the reference sample for the evaluation at n' = n + W is rows 1..n.
  if (options_.test == ConstancyMonitorOptions::Test::kReferenceEquality && armed >= 0) {
    const auto w = static_cast<std::int64_t>(spec_.window.rows);
    if ((armed + w) % b == 0) {
      CovarianceContext ref;
      has_reference_ = CovarianceContext::Create(reference, options_.covariance, &ref).ok();
      if (has_reference_) {
        reference_theta_ = ref.theta();
        reference_cov_ = ref.Full();
        reference_dof_ = ref.info().dof;
      }
    }
  }
  if (r.evaluated || r.alarm.explanation.empty()) Fill(&r);
  *reading = r;
  return Status::Ok();
}

}  // namespace rimwatch
