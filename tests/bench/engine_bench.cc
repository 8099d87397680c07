// Engine benchmark: per-row cost of the streaming estimator against a batch re-fit of the same
// sliding window of W rows, for (n, p) in {(3,2), (6,4), (10,4)} and W in {250, 1000, 4000}.
//
// One iteration = one new row: one VarEstimator::Update on the streaming side, one re-fit of the
// window that ends at the new row on the batch side. Times are therefore per row.
//   StreamFull      Update (Givens fold, LINPACK downdate, refold every W downdates)
//                   + Coefficients + ComputeCompanionSpectrum(with_gradient = false)
//   StreamNoEig     Update + Coefficients
//   EigOnly         ComputeCompanionSpectrum(with_gradient = false) alone (np x np companion)
//   BatchFull       Householder QR of the W x (k+n) window [X Y], Phi' = R11^{-1} R12,
//                   + the same eigenvalue step
//   BatchNoEig      BatchFull without the eigenvalue step
//   StreamWald      Update + CovarianceContext::Create(HC3) + Restricted(R) + WaldTest
//   BatchWald       QR re-fit + full HC3 sandwich (I (x) A) meat (I (x) A), O(W (nk)^2),
//                   + the same WaldTest
//   BatchWaldCheap  QR re-fit + HC3 R V R' from the restricted scores s_t = R (I (x) A) g_t
//                   only, O(W q k): how much of the Wald gap is the cheap path, not streaming
// R is the Granger restriction "v2 does not Granger-cause v1" at every lag (q = p rows).
// Before a batch family is timed for a configuration, streaming and batch outputs are compared on
// one window (coefficients, eigenvalues, spectral radius, Wald statistic); a mismatch skips the
// benchmark with an error instead of timing two different computations.
// Data: a simulated stable VAR(p) with a constant, DeterministicRandom with a fixed seed
// (invented series v1..vn).

#include <benchmark/benchmark.h>

#include <Eigen/Dense>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <cstdint>
#include <cstdio>
#include <limits>
#include <map>
#include <string>
#include <tuple>
#include <utility>
#include <vector>

#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/random.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"
#include "rimwatch/engine/wald.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();
// Streaming (Givens updates and downdates since the last refold) and Householder QR round
// differently; both are backward stable, so on these well-conditioned windows they agree to a
// modest multiple of cond(X) eps (Golub & Van Loan, Matrix Computations, 4th ed. 2013, Sec. 5.3,
// sensitivity of least squares; from memory). Observed gaps are at most about 5e-14 (~200 eps,
// at W = 4000); the bound leaves a factor of about 50.
constexpr double kAgreementTol = 1e4 * kEps;
constexpr int kObservations = 50000;   // simulated rows per (n, p); the benchmark cursor wraps
constexpr int kBurnIn = 500;           // discarded start-up rows of the simulation
constexpr double kTargetRadius = 0.8;  // companion spectral radius of the simulated VAR
constexpr double kIntercept = 0.1;

struct Config {
  int n;
  int p;
  int w;
};

Config ConfigOf(const benchmark::State& state) {
  return {static_cast<int>(state.range(0)), static_cast<int>(state.range(1)),
          static_cast<int>(state.range(2))};
}

VarSpec SpecFor(const Config& c) {
  VarSpec spec;
  for (int i = 0; i < c.n; ++i) {
    // "v1", "v2", ...; built by insert to avoid a GCC 12 -Wrestrict false alarm on "v" + str.
    std::string name = std::to_string(i + 1);
    name.insert(name.begin(), 'v');
    spec.variables.push_back(std::move(name));
  }
  spec.lags = c.p;
  spec.deterministic = Deterministic::kConstant;
  spec.window.kind = WindowKind::kSliding;
  spec.window.rows = static_cast<std::size_t>(c.w);
  return spec;
}

// ---------------------------------------------------------------------------------------------
// Simulator.

// [A_1 ... A_p] (n x np) whose companion matrix has spectral radius exactly kTargetRadius: draw
// iid normal entries, then replace A_l by s^l A_l. The companion eigenvalues solve
// det(lambda^p I - sum_l A_l lambda^(p-l)) = 0, and A_l -> s^l A_l maps every root lambda to
// s lambda (Luetkepohl 2005, New Introduction to Multiple Time Series Analysis, Sec. 2.1.1).
Eigen::MatrixXd StableLagMatrices(int n, int p, DeterministicRandom* rng) {
  const double sd = 1.0 / std::sqrt(static_cast<double>(n * p));
  Eigen::MatrixXd a(n, n * p);
  for (Eigen::Index j = 0; j < a.cols(); ++j) {
    for (Eigen::Index i = 0; i < a.rows(); ++i) a(i, j) = sd * rng->Normal();
  }
  const int np = n * p;
  Eigen::MatrixXd f = Eigen::MatrixXd::Zero(np, np);
  f.topRows(n) = a;
  if (p > 1) f.bottomLeftCorner(np - n, np - n).setIdentity();
  const double rho = f.eigenvalues().cwiseAbs().maxCoeff();
  const double s = kTargetRadius / rho;
  for (int lag = 1; lag <= p; ++lag) a.middleCols((lag - 1) * n, n) *= std::pow(s, lag);
  return a;
}

// y_t = c + sum_l A_l y_{t-l} + e_t, e_t iid N(0, I_n). Returns n x rows (one column per
// observation) after kBurnIn discarded rows.
Eigen::MatrixXd SimulateVar(const Eigen::MatrixXd& a, int p, int rows, DeterministicRandom* rng) {
  const int n = static_cast<int>(a.rows());
  const int total = rows + kBurnIn;
  Eigen::MatrixXd y = Eigen::MatrixXd::Zero(n, total);
  for (int t = p; t < total; ++t) {
    Eigen::VectorXd yt = Eigen::VectorXd::Constant(n, kIntercept);
    for (int lag = 1; lag <= p; ++lag) {
      yt.noalias() += a.middleCols((lag - 1) * n, n) * y.col(t - lag);
    }
    for (int i = 0; i < n; ++i) yt[i] += rng->Normal();
    y.col(t) = yt;
  }
  return y.rightCols(rows);
}

// Estimation rows z_t = [1, y_{t-1}', ..., y_{t-p}', y_t'] for t = p .. rows-1, one per row of
// the result ((rows - p) x (k + n)); the regressor order of var_spec.h, built independently.
Eigen::MatrixXd EstimationRows(const Eigen::MatrixXd& y, int p) {
  const int n = static_cast<int>(y.rows());
  const int k = 1 + n * p;
  const Eigen::Index rows = y.cols() - p;
  Eigen::MatrixXd z(rows, k + n);
  for (Eigen::Index r = 0; r < rows; ++r) {
    const Eigen::Index t = r + p;
    z(r, 0) = 1.0;
    for (int lag = 1; lag <= p; ++lag) {
      z.row(r).segment(1 + (lag - 1) * n, n) = y.col(t - lag).transpose();
    }
    z.row(r).tail(n) = y.col(t).transpose();
  }
  return z;
}

struct SimulatedData {
  Eigen::MatrixXd y;  // n x kObservations
  Eigen::MatrixXd z;  // (kObservations - p) x (k + n)
};

const SimulatedData& DataFor(int n, int p) {
  static std::map<std::pair<int, int>, SimulatedData> cache;
  auto it = cache.find({n, p});
  if (it != cache.end()) return it->second;
  // DeterministicRandom: the same series on every standard library (std::normal_distribution
  // is not specified bit for bit).
  DeterministicRandom rng(20240611u + 100u * static_cast<std::uint64_t>(n) +
                          static_cast<std::uint64_t>(p));
  SimulatedData data;
  const Eigen::MatrixXd a = StableLagMatrices(n, p, &rng);
  data.y = SimulateVar(a, p, kObservations, &rng);
  data.z = EstimationRows(data.y, p);
  return cache.emplace(std::make_pair(n, p), std::move(data)).first->second;
}

// Observations fed before timing: 1.5 W estimation rows, so the window is full and the timed
// rows start half-way between two refolds.
int WarmObservations(const Config& c) { return c.p + c.w + c.w / 2; }

const VarEstimator& WarmEstimator(const Config& c) {
  static std::map<std::tuple<int, int, int>, VarEstimator> cache;
  const auto key = std::make_tuple(c.n, c.p, c.w);
  auto it = cache.find(key);
  if (it != cache.end()) return it->second;
  const SimulatedData& data = DataFor(c.n, c.p);
  VarEstimator est(SpecFor(c));
  for (int t = 0; t < WarmObservations(c); ++t) est.Update(data.y.col(t));
  return cache.emplace(key, std::move(est)).first->second;
}

// v2 does not Granger-cause v1: the coefficients of v2 at lags 1..p in the v1 equation are zero
// (Granger 1969, Econometrica 37; Luetkepohl 2005, Sec. 3.6.1; from memory).
LinearRestriction GrangerV2ToV1(const VarSpec& spec) {
  LinearRestriction r;
  GrangerRestriction(spec, {1}, {0}, &r);
  return r;
}

// ---------------------------------------------------------------------------------------------
// Streaming side: a copy of the warmed estimator fed one new observation per call.

class StreamingRun {
 public:
  explicit StreamingRun(const Config& c)
      : data_(DataFor(c.n, c.p)),
        est_(WarmEstimator(c)),
        cursor_(WarmObservations(c)),
        refolds_before_(est_.refolds()) {}

  Status Next() {
    const UpdateResult u = est_.Update(data_.y.col(cursor_));
    cursor_ = (cursor_ + 1) % static_cast<int>(data_.y.cols());
    benchmark::DoNotOptimize(u.prediction_scale);
    return u.status;
  }
  const VarEstimator& est() const { return est_; }
  // Refolds done while timing, reported per row (expected 1 / W).
  void Report(benchmark::State* state) const {
    state->counters["refolds"] = benchmark::Counter(
        static_cast<double>(est_.refolds() - refolds_before_), benchmark::Counter::kAvgIterations);
  }

 private:
  const SimulatedData& data_;
  VarEstimator est_;
  int cursor_;
  std::int64_t refolds_before_;
};

// Cheap-path HC3 Wald test on the estimator's current window.
Status StreamingWald(const VarEstimator& est, const LinearRestriction& r, WaldResult* out) {
  CovarianceOptions options;
  options.kind = CovarianceKind::kHC3;
  CovarianceContext ctx;
  Status st = CovarianceContext::Create(est, options, &ctx);
  if (!st.ok()) return st;
  const Eigen::MatrixXd rvr = ctx.Restricted(r.r_matrix);
  return WaldTest(ctx.theta(), r, rvr, ctx.info().dof, out);
}

// ---------------------------------------------------------------------------------------------
// Batch side: everything from the W raw rows of the window, work buffers reused across rows.

class BatchRefit {
 public:
  BatchRefit(const Config& c, Eigen::Index first_start)
      : c_(c), k_(1 + c.n * c.p), data_(DataFor(c.n, c.p)), start_(first_start) {}

  // Re-fit the window that starts at the current cursor, then move the cursor one row on.
  // Householder QR of [X Y] = Q R; R is the same augmented factor as the streaming one up to row
  // signs, so Phi' = R11^{-1} R12 (Golub & Van Loan 2013, Sec. 5.3; from memory).
  void Next() {
    qr_.compute(data_.z.middleRows(start_, c_.w));
    const int m = k_ + c_.n;
    r_ = qr_.matrixQR().topRows(m).triangularView<Eigen::Upper>();
    phi_t_ =
        r_.topLeftCorner(k_, k_).triangularView<Eigen::Upper>().solve(r_.topRightCorner(k_, c_.n));
    phi_ = phi_t_.transpose();
    window_ = start_;
    start_ = (start_ + 1) % (data_.z.rows() - c_.w + 1);
  }

  const Eigen::MatrixXd& phi() const { return phi_; }
  Eigen::Map<const Eigen::VectorXd> theta() const {  // vec(Phi'), theta[eq * k + j]
    return Eigen::Map<const Eigen::VectorXd>(phi_t_.data(), phi_t_.size());
  }
  double dof() const { return static_cast<double>(c_.w - k_); }

  Status FullHc3(const LinearRestriction& r, Eigen::MatrixXd* rvr);
  Status CheapHc3(const LinearRestriction& r, Eigen::MatrixXd* rvr);

 private:
  auto X() const { return data_.z.middleRows(window_, c_.w).leftCols(k_); }
  auto Y() const { return data_.z.middleRows(window_, c_.w).rightCols(c_.n); }
  Status Hc3Residuals();
  void InverseCrossProduct();

  Config c_;
  int k_;
  const SimulatedData& data_;
  Eigen::Index start_;
  Eigen::Index window_ = 0;
  Eigen::HouseholderQR<Eigen::MatrixXd> qr_;
  Eigen::MatrixXd r_, phi_t_, phi_;
  Eigen::MatrixXd e_, u_, g_, meat_, a_, rinv_, v_, tmp_, s_;
  Eigen::VectorXd h_;
};

// e~_t = e_t / (1 - h_t), h_t = x_t' (X'X)^{-1} x_t = |R11^{-T} x_t|^2 (HC3: MacKinnon & White
// 1985, J. Econometrics 29, 305-325; from memory).
Status BatchRefit::Hc3Residuals() {
  e_ = Y();
  e_.noalias() -= X() * phi_t_;
  u_ = X();  // U = X R11^{-1}: row t is (R11^{-T} x_t)'
  r_.topLeftCorner(k_, k_).triangularView<Eigen::Upper>().solveInPlace<Eigen::OnTheRight>(u_);
  h_ = u_.rowwise().squaredNorm();
  if (!(h_.maxCoeff() < 1.0)) return Status::Numerical("batch HC3: a leverage is 1");
  e_.array().colwise() /= (1.0 - h_.array());
  return Status::Ok();
}

// A = (X'X)^{-1} = R11^{-1} R11^{-T}.
void BatchRefit::InverseCrossProduct() {
  rinv_ = r_.topLeftCorner(k_, k_).triangularView<Eigen::Upper>().solve(
      Eigen::MatrixXd::Identity(k_, k_));
  a_.noalias() = rinv_ * rinv_.transpose();
}

// V = (I (x) A) [sum_t g_t g_t'] (I (x) A), g_t = e~_t (x) x_t (White 1980, Econometrica 48,
// 817-838, applied equation by equation; HC3 residuals as above), then R V R'. The meat costs
// W (nk)^2 / 2 multiply-adds.
Status BatchRefit::FullHc3(const LinearRestriction& r, Eigen::MatrixXd* rvr) {
  Status st = Hc3Residuals();
  if (!st.ok()) return st;
  const int n = c_.n;
  const int k = k_;
  g_.resize(c_.w, n * k);
  for (int i = 0; i < n; ++i) g_.middleCols(i * k, k) = e_.col(i).asDiagonal() * X();
  meat_.setZero(n * k, n * k);
  meat_.selfadjointView<Eigen::Lower>().rankUpdate(g_.transpose());
  meat_ = meat_.selfadjointView<Eigen::Lower>();
  InverseCrossProduct();
  v_.resize(n * k, n * k);
  for (int a = 0; a < n; ++a) {
    for (int b = 0; b < n; ++b) {
      tmp_.noalias() = a_ * meat_.block(a * k, b * k, k, k);
      v_.block(a * k, b * k, k, k).noalias() = tmp_ * a_;
    }
  }
  *rvr = r.r_matrix * v_ * r.r_matrix.transpose();
  return Status::Ok();
}

// R V R' = sum_t s_t s_t', s_t = sum_i e~_ti (R_i A) x_t, R_i the columns of equation i.
Status BatchRefit::CheapHc3(const LinearRestriction& r, Eigen::MatrixXd* rvr) {
  Status st = Hc3Residuals();
  if (!st.ok()) return st;
  InverseCrossProduct();
  const int k = k_;
  s_.setZero(r.r_matrix.rows(), c_.w);
  for (int i = 0; i < c_.n; ++i) {
    if (r.r_matrix.middleCols(i * k, k).isZero(0.0)) continue;
    tmp_.noalias() = r.r_matrix.middleCols(i * k, k) * a_;
    s_.noalias() += (tmp_ * X().transpose()) * e_.col(i).asDiagonal();
  }
  rvr->noalias() = s_ * s_.transpose();
  return Status::Ok();
}

// ---------------------------------------------------------------------------------------------
// Agreement check: the two sides must compute the same thing before their costs are compared.

double RelativeGap(const Eigen::MatrixXd& a, const Eigen::MatrixXd& b) {
  return (a - b).cwiseAbs().maxCoeff() / std::max(1.0, b.cwiseAbs().maxCoeff());
}

// The batch window that the warmed estimator holds: its last W estimation rows.
Eigen::Index WarmWindowStart(const Config& c) { return WarmObservations(c) - c.p - c.w; }

struct Agreement {
  std::string failure;      // empty: the two sides agree
  double coef_gap = 0.0;    // max |Phi_stream - Phi_batch| / max(1, max |Phi_batch|)
  double eig_gap = 0.0;     // max over streaming eigenvalues of the distance to the batch set
  double radius_gap = 0.0;  // |rho_stream - rho_batch|
  double wald_gap = 0.0;    // max |W_batch - W_stream| / max(1, W_stream), full and cheap batch
};

double EigenvalueGap(const CompanionSpectrum& a, const CompanionSpectrum& b) {
  double gap = 0.0;
  for (const auto& la : a.eigenvalues) {
    double nearest = std::numeric_limits<double>::infinity();
    for (const auto& lb : b.eigenvalues) nearest = std::min(nearest, std::abs(la - lb));
    gap = std::max(gap, nearest);
  }
  return gap;
}

void CompareWald(const Config& c, const VarEstimator& est, BatchRefit* batch, Agreement* out) {
  const LinearRestriction r = GrangerV2ToV1(est.spec());
  WaldResult w_stream, w_full, w_cheap;
  Eigen::MatrixXd rvr_full, rvr_cheap;
  if (!StreamingWald(est, r, &w_stream).ok() || !batch->FullHc3(r, &rvr_full).ok() ||
      !batch->CheapHc3(r, &rvr_cheap).ok() ||
      !WaldTest(batch->theta(), r, rvr_full, batch->dof(), &w_full).ok() ||
      !WaldTest(batch->theta(), r, rvr_cheap, batch->dof(), &w_cheap).ok()) {
    out->failure = "a Wald test failed";
    return;
  }
  if (w_stream.df != c.p) out->failure = "Granger restriction has the wrong number of rows";
  const double scale = std::max(1.0, w_stream.statistic);
  out->wald_gap = std::max(std::abs(w_full.statistic - w_stream.statistic),
                           std::abs(w_cheap.statistic - w_stream.statistic)) /
                  scale;
}

Agreement CheckAgreementOnce(const Config& c) {
  Agreement out;
  const VarEstimator& est = WarmEstimator(c);
  BatchRefit batch(c, WarmWindowStart(c));
  batch.Next();
  Eigen::MatrixXd phi;
  if (!est.Coefficients(&phi).ok()) {
    out.failure = "streaming fit is rank deficient";
    return out;
  }
  out.coef_gap = RelativeGap(phi, batch.phi());
  CompanionSpectrum s1, s2;
  if (!ComputeCompanionSpectrum(est.spec(), phi, false, &s1).ok() ||
      !ComputeCompanionSpectrum(est.spec(), batch.phi(), false, &s2).ok()) {
    out.failure = "eigen solver failed";
    return out;
  }
  out.eig_gap = EigenvalueGap(s1, s2);
  out.radius_gap = std::abs(s1.spectral_radius - s2.spectral_radius);
  CompareWald(c, est, &batch, &out);
  const double worst = std::max({out.coef_gap, out.eig_gap, out.radius_gap, out.wald_gap});
  if (out.failure.empty() && !(worst <= kAgreementTol)) {
    char text[96];
    std::snprintf(text, sizeof(text), "outputs differ by %.2e (bound %.2e)", worst, kAgreementTol);
    out.failure = text;
  }
  return out;
}

// Runs the agreement check once per configuration; on failure the benchmark is skipped with the
// reason. The gaps are reported as counters so the figures show what was compared.
bool Agrees(const Config& c, benchmark::State* state) {
  static std::map<std::tuple<int, int, int>, Agreement> verdicts;
  const auto key = std::make_tuple(c.n, c.p, c.w);
  auto it = verdicts.find(key);
  if (it == verdicts.end()) it = verdicts.emplace(key, CheckAgreementOnce(c)).first;
  const Agreement& a = it->second;
  state->counters["coef_gap"] = a.coef_gap;
  state->counters["eig_gap"] = a.eig_gap;
  state->counters["wald_gap"] = a.wald_gap;
  if (a.failure.empty()) return true;
  state->SkipWithError(("streaming and batch disagree: " + a.failure).c_str());
  return false;
}

// ---------------------------------------------------------------------------------------------
// Benchmarks.

void BM_StreamFull(benchmark::State& state) {
  StreamingRun run(ConfigOf(state));
  Eigen::MatrixXd phi;
  CompanionSpectrum spectrum;
  for (auto _ : state) {
    if (!run.Next().ok() || !run.est().Coefficients(&phi).ok() ||
        !ComputeCompanionSpectrum(run.est().spec(), phi, false, &spectrum).ok()) {
      state.SkipWithError("streaming step failed");
      break;
    }
    benchmark::DoNotOptimize(spectrum.spectral_radius);
  }
  run.Report(&state);
}

void BM_StreamNoEig(benchmark::State& state) {
  StreamingRun run(ConfigOf(state));
  Eigen::MatrixXd phi;
  for (auto _ : state) {
    if (!run.Next().ok() || !run.est().Coefficients(&phi).ok()) {
      state.SkipWithError("streaming step failed");
      break;
    }
    benchmark::DoNotOptimize(phi.data());
    benchmark::ClobberMemory();
  }
  run.Report(&state);
}

void BM_EigOnly(benchmark::State& state) {
  const VarEstimator& est = WarmEstimator(ConfigOf(state));
  Eigen::MatrixXd phi;
  if (!est.Coefficients(&phi).ok()) state.SkipWithError("warm fit is rank deficient");
  CompanionSpectrum spectrum;
  for (auto _ : state) {
    if (!ComputeCompanionSpectrum(est.spec(), phi, false, &spectrum).ok()) {
      state.SkipWithError("eigen solver failed");
      break;
    }
    benchmark::DoNotOptimize(spectrum.spectral_radius);
  }
}

void BM_BatchFull(benchmark::State& state) {
  const Config c = ConfigOf(state);
  if (!Agrees(c, &state)) return;
  const VarSpec spec = SpecFor(c);
  BatchRefit batch(c, WarmWindowStart(c));
  CompanionSpectrum spectrum;
  for (auto _ : state) {
    batch.Next();
    if (!ComputeCompanionSpectrum(spec, batch.phi(), false, &spectrum).ok()) {
      state.SkipWithError("eigen solver failed");
      break;
    }
    benchmark::DoNotOptimize(spectrum.spectral_radius);
  }
}

void BM_BatchNoEig(benchmark::State& state) {
  const Config c = ConfigOf(state);
  if (!Agrees(c, &state)) return;
  BatchRefit batch(c, WarmWindowStart(c));
  for (auto _ : state) {
    batch.Next();
    benchmark::DoNotOptimize(batch.phi().data());
    benchmark::ClobberMemory();
  }
}

void BM_StreamWald(benchmark::State& state) {
  StreamingRun run(ConfigOf(state));
  const LinearRestriction r = GrangerV2ToV1(run.est().spec());
  WaldResult result;
  for (auto _ : state) {
    if (!run.Next().ok() || !StreamingWald(run.est(), r, &result).ok()) {
      state.SkipWithError("streaming Wald failed");
      break;
    }
    benchmark::DoNotOptimize(result.statistic);
  }
  run.Report(&state);
}

template <bool kFull>
void BM_BatchWaldImpl(benchmark::State& state) {
  const Config c = ConfigOf(state);
  if (!Agrees(c, &state)) return;
  const LinearRestriction r = GrangerV2ToV1(SpecFor(c));
  BatchRefit batch(c, WarmWindowStart(c));
  Eigen::MatrixXd rvr;
  WaldResult result;
  for (auto _ : state) {
    batch.Next();
    const Status st = kFull ? batch.FullHc3(r, &rvr) : batch.CheapHc3(r, &rvr);
    if (!st.ok() || !WaldTest(batch.theta(), r, rvr, batch.dof(), &result).ok()) {
      state.SkipWithError("batch Wald failed");
      break;
    }
    benchmark::DoNotOptimize(result.statistic);
  }
}

void BM_BatchWald(benchmark::State& state) { BM_BatchWaldImpl<true>(state); }
void BM_BatchWaldCheap(benchmark::State& state) { BM_BatchWaldImpl<false>(state); }

void Configs(benchmark::internal::Benchmark* b) {
  b->ArgNames({"n", "p", "W"});
  for (const auto& [n, p] : std::vector<std::pair<int, int>>{{3, 2}, {6, 4}, {10, 4}}) {
    for (int w : {250, 1000, 4000}) b->Args({n, p, w});
  }
  b->Unit(benchmark::kMicrosecond);
}

BENCHMARK(BM_StreamFull)->Apply(Configs);
BENCHMARK(BM_StreamNoEig)->Apply(Configs);
BENCHMARK(BM_EigOnly)->Apply(Configs);
BENCHMARK(BM_BatchFull)->Apply(Configs);
BENCHMARK(BM_BatchNoEig)->Apply(Configs);
BENCHMARK(BM_StreamWald)->Apply(Configs);
BENCHMARK(BM_BatchWald)->Apply(Configs);
BENCHMARK(BM_BatchWaldCheap)->Apply(Configs);

}  // namespace
}  // namespace rimwatch

BENCHMARK_MAIN();
