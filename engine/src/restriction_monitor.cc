#include "rimwatch/engine/restriction_monitor.h"

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <iomanip>
#include <limits>
#include <map>
#include <mutex>
#include <sstream>
#include <utility>

#include "rimwatch/engine/random.h"

namespace rimwatch {
namespace {

// A pivot of a normaliser below this fraction of its diagonal means the window carries no
// independent score variation in some direction (too few rows, or degenerate scores); the
// candidate is then left out. The same fraction floors w - Q (a perfect fit of the window
// regression gives a huge, finite value). 1e-10 is about 4.5e5 epsilon: far above rounding in
// sums of a few thousand terms, far below any real conditioning.
constexpr double kPivotFraction = 1e-10;

// "No value" for a candidate (its normaliser failed or it was never evaluated).
constexpr double kNone = -std::numeric_limits<double>::infinity();

// Default shortest candidate window (see RestrictionMonitorOptions::MinWindow).
constexpr std::int64_t kDefaultMinWindow = 50;

int PackedSize(int q) { return q * (q + 1) / 2; }
// Packed lower triangle, row-major: (i, j) with j <= i.
int Packed(int i, int j) { return i * (i + 1) / 2 + j; }

std::string Fmt(double x, int digits = 4) {
  std::ostringstream out;
  out << std::setprecision(digits) << x;
  return out.str();
}

// The window statistic of the header for records (S, V packed, r) `current` and `base`:
//   H = rho dV = C C',  y = C^{-1} dS,  Q = |y|^2,  Q_K = y' K^{-1} y,  den = max(w - Q, eps w),
// returns x = Q_K / den (so L = w ln(1 + x) <= w x), or -1 when H is not positive definite to
// working accuracy. Q > 0 fixes q at compile time (unrolled loops).
template <int Q>
double WindowStatistic(int q_runtime, int equations, const double* current, const double* base,
                       std::int64_t w, const double* kernel_inv, double* work) {
  const int q = Q > 0 ? Q : q_runtime;
  const auto wd = static_cast<double>(w);
  const double* vc = current + q;
  const double* vb = base + q;
  const double dr = current[q + PackedSize(q)] - base[q + PackedSize(q)];
  if (!(dr > 0.0)) return -1.0;
  const double rho = dr / (wd * equations);
  double* c = work;  // Cholesky factor of H, packed
  double* y = c + PackedSize(q);
  for (int j = 0; j < q; ++j) {
    const int jj = Packed(j, j);
    const double hjj = rho * (vc[jj] - vb[jj]);
    double d = hjj;
    for (int k = 0; k < j; ++k) d -= c[Packed(j, k)] * c[Packed(j, k)];
    if (!(d > kPivotFraction * hjj)) return -1.0;
    const double cjj = std::sqrt(d);
    c[jj] = cjj;
    for (int i = j + 1; i < q; ++i) {
      const int ij = Packed(i, j);
      double v = rho * (vc[ij] - vb[ij]);
      for (int k = 0; k < j; ++k) v -= c[Packed(i, k)] * c[Packed(j, k)];
      c[ij] = v / cjj;
    }
  }
  double quad = 0.0;
  for (int i = 0; i < q; ++i) {
    double v = current[i] - base[i];
    for (int k = 0; k < i; ++k) v -= c[Packed(i, k)] * y[k];
    y[i] = v / c[Packed(i, i)];
    quad += y[i] * y[i];
  }
  double quad_k = 0.0;
  for (int i = 0; i < q; ++i) {
    double v = 0.0;
    for (int j = 0; j < q; ++j) v += kernel_inv[i * q + j] * y[j];
    quad_k += y[i] * v;
  }
  const double den = std::max(wd - quad, kPivotFraction * wd);
  return std::max(quad_k, 0.0) / den;
}

using StatisticFn = double (*)(int, int, const double*, const double*, std::int64_t, const double*,
                               double*);

StatisticFn PickStatistic(int q) {
  switch (q) {
    case 1:
      return &WindowStatistic<1>;
    case 2:
      return &WindowStatistic<2>;
    case 3:
      return &WindowStatistic<3>;
    case 4:
      return &WindowStatistic<4>;
    default:
      return &WindowStatistic<0>;
  }
}

}  // namespace

// ---------------------------------------------------------------------------------------------
// ScanDesign

bool ScanDesign::IsValid(std::string* why) const {
  auto fail = [&](const std::string& msg) {
    if (why) *why = msg;
    return false;
  };
  if (q < 1) return fail("scan: q = " + std::to_string(q) + " must be >= 1");
  if (blocks.empty()) return fail("scan: the restriction touches no equation");
  for (const Eigen::MatrixXd& b : blocks) {
    if (b.rows() != q || b.cols() != blocks[0].cols() || b.cols() < 1 || !b.allFinite()) {
      return fail("scan: every block must be q x c with the same c >= 1 and finite");
    }
  }
  if (training_scores < equations() + 1) {
    return fail("scan: training_scores = " + std::to_string(training_scores) +
                " must be >= touched equations + 1 = " + std::to_string(equations() + 1));
  }
  if (horizon_rows < 1) return fail("scan: horizon_rows must be >= 1");
  if (min_window < q + 1) {
    return fail("scan: min_window = " + std::to_string(min_window) +
                " must be >= q + 1 = " + std::to_string(q + 1));
  }
  std::int64_t last = 0;
  for (std::int64_t w : windows) {
    if (w < min_window || w >= horizon_rows || w <= last) {
      return fail("scan: window " + std::to_string(w) +
                  " must be increasing and lie in [min_window, horizon_rows)");
    }
    last = w;
  }
  if (stride_divisor < 1) return fail("scan: stride_divisor must be >= 1");
  if (!(scale_penalty >= 0.0) || !std::isfinite(scale_penalty)) {
    return fail("scan: scale_penalty must be finite and >= 0");
  }
  if (!since_arming && windows.empty()) {
    return fail("scan: no candidate change rows (no windows and since_arming off)");
  }
  return true;
}

std::vector<std::int64_t> ScanWindows(std::int64_t min_window, std::int64_t horizon_rows,
                                      double ratio) {
  std::vector<std::int64_t> out;
  for (int j = 0;; ++j) {
    const auto w = static_cast<std::int64_t>(
        std::llround(static_cast<double>(min_window) * std::pow(ratio, j)));
    if (w >= horizon_rows) break;
    if (out.empty() || w > out.back()) out.push_back(w);
  }
  return out;
}

ScanDesign MakeScanDesign(const VarSpec& spec, const LinearRestriction& restriction,
                          std::int64_t training_rows, std::int64_t horizon_rows,
                          std::int64_t min_window, double ratio) {
  const int k = spec.k();
  const Eigen::MatrixXd& r = restriction.r_matrix;
  ScanDesign d;
  d.q = static_cast<int>(r.rows());
  d.blocks.clear();
  std::vector<int> columns;
  for (int j = 0; j < k; ++j) {
    bool used = false;
    for (int i = 0; i < spec.n(); ++i) used = used || !r.col(i * k + j).isZero(0.0);
    if (used) columns.push_back(j);
  }
  for (int i = 0; i < spec.n(); ++i) {
    if (r.middleCols(i * k, k).isZero(0.0)) continue;
    Eigen::MatrixXd b(d.q, static_cast<Eigen::Index>(columns.size()));
    for (std::size_t c = 0; c < columns.size(); ++c) b.col(c) = r.col(i * k + columns[c]);
    d.blocks.push_back(std::move(b));
  }
  d.training_scores = training_rows - k;
  d.horizon_rows = horizon_rows;
  d.min_window = min_window;
  d.windows = ScanWindows(min_window, horizon_rows, ratio);
  return d;
}

// ---------------------------------------------------------------------------------------------
// ScanScores and ScanTraining

ScanScores::ScanScores(int q, const Eigen::MatrixXd& om)
    : q_(q), om_(om), om_inv_(om.llt().solve(Eigen::MatrixXd::Identity(om.rows(), om.cols()))) {}

// s = sum_a u_a z_a;  V = sum_{a,b} Om_ab z_a z_b';  r = u' Om^{-1} u. Plain loops: the sizes are
// tiny and this runs once per simulated row.
void ScanScores::Build(const Eigen::Ref<const Eigen::VectorXd>& u,
                       const Eigen::Ref<const Eigen::MatrixXd>& z, ScanRow* row) const {
  const int ne = static_cast<int>(u.size());
  row->s.resize(q_);
  row->v.resize(PackedSize(q_));
  for (int i = 0; i < q_; ++i) {
    double si = 0.0;
    for (int a = 0; a < ne; ++a) si += z(i, a) * u[a];
    row->s[i] = si;
    for (int j = 0; j <= i; ++j) {
      double vij = 0.0;
      for (int a = 0; a < ne; ++a) {
        for (int b = 0; b < ne; ++b) vij += om_(a, b) * z(i, a) * z(j, b);
      }
      row->v[Packed(i, j)] = vij;
    }
  }
  double r = 0.0;
  for (int a = 0; a < ne; ++a) {
    for (int b = 0; b < ne; ++b) r += u[a] * om_inv_(a, b) * u[b];
  }
  row->r = r;
}

ScanTraining::ScanTraining(int q, int equations)
    : q_(q),
      equations_(equations),
      uu_(Eigen::MatrixXd::Zero(equations, equations)),
      zz_(static_cast<std::size_t>(equations * equations), Eigen::MatrixXd::Zero(q, q)),
      ss_(Eigen::MatrixXd::Zero(q, q)) {}

void ScanTraining::Add(const Eigen::Ref<const Eigen::VectorXd>& u,
                       const Eigen::Ref<const Eigen::MatrixXd>& z) {
  uu_.noalias() += u * u.transpose();
  for (int a = 0; a < equations_; ++a) {
    for (int b = a; b < equations_; ++b)
      zz_[a * equations_ + b].noalias() += z.col(a) * z.col(b).transpose();
  }
  const Eigen::VectorXd s = z * u;
  ss_.noalias() += s * s.transpose();
  ++rows_;
}

bool ScanTraining::Finish(Eigen::MatrixXd* om, Eigen::MatrixXd* pooled_ss,
                          Eigen::MatrixXd* pooled_v, double* pooled_r) const {
  if (rows_ < equations_ + 1) return false;
  *om = uu_ / static_cast<double>(rows_);
  Eigen::LLT<Eigen::MatrixXd> llt(*om);
  if (llt.info() != Eigen::Success || llt.matrixL().toDenseMatrix().diagonal().minCoeff() <=
                                          kPivotFraction * std::sqrt(om->diagonal().maxCoeff())) {
    return false;
  }
  *pooled_ss = ss_;
  pooled_v->setZero(q_, q_);
  for (int a = 0; a < equations_; ++a) {
    for (int b = a; b < equations_; ++b) {
      const Eigen::MatrixXd& zab = zz_[a * equations_ + b];
      if (a == b) {
        *pooled_v += (*om)(a, a) * zab;
      } else {
        *pooled_v += (*om)(a, b) * (zab + zab.transpose());
      }
    }
  }
  *pooled_r = static_cast<double>(rows_ * equations_);  // tr(Om^{-1} sum u u') = N n_e
  return true;
}

// ---------------------------------------------------------------------------------------------
// ChangeScan

ChangeScan::ChangeScan(ScanDesign design) : design_(std::move(design)) {
  const int q = design_.q;
  record_ = q + PackedSize(q) + 1;
  statistic_ = PickStatistic(q);
  ring_rows_ = design_.windows.empty() ? 1 : design_.windows.back() + 1;
  ring_.assign(static_cast<std::size_t>(ring_rows_ * record_), 0.0);
  zero_.assign(record_, 0.0);
  current_.assign(record_, 0.0);
  work_.assign(PackedSize(q) + q, 0.0);
  for (std::int64_t w : design_.windows) stride_.push_back(Stride(w));
  for (std::int64_t w : design_.windows) penalty_.push_back(ScalePenalty(design_, w));
  held_.assign(design_.windows.size() + 1, kNone);
  held_window_.assign(design_.windows.size() + 1, 0);
  kernel_inv_ = Eigen::MatrixXd::Identity(q, q);
}

void ChangeScan::Start(const Eigen::MatrixXd& pooled_ss, const Eigen::MatrixXd& pooled_v,
                       double pooled_r, std::int64_t pooled_rows) {
  pooled_ss_ = pooled_ss;
  pooled_v_ = pooled_v;
  pooled_r_ = pooled_r;
  pooled_rows_ = pooled_rows;
  RefreshKernel();
  std::fill(current_.begin(), current_.end(), 0.0);
  std::fill(held_.begin(), held_.end(), kNone);
  std::fill(held_window_.begin(), held_window_.end(), 0);
  countdown_ = stride_;
  next_arming_ = design_.min_window;
  rows_ = 0;
  ring_pos_ = 0;
  std::copy(current_.begin(), current_.end(), ring_.begin());
  started_ = true;
}

// K = Lp^{-1} J Lp^{-T} with Lp Lp' = rho_all sum V_t, so K^{-1} = Lp' J^{-1} Lp; the identity
// when either pooled matrix is not positive definite.
void ChangeScan::RefreshKernel() {
  const int q = design_.q;
  kernel_inv_.setIdentity(q, q);
  if (pooled_rows_ < 1 || !(pooled_r_ > 0.0)) return;
  const double rho = pooled_r_ / (static_cast<double>(pooled_rows_) * design_.equations());
  Eigen::LLT<Eigen::MatrixXd> hom(rho * pooled_v_);
  Eigen::LLT<Eigen::MatrixXd> rob(pooled_ss_);
  if (hom.info() != Eigen::Success || rob.info() != Eigen::Success) return;
  const Eigen::MatrixXd lp = hom.matrixL();
  const Eigen::MatrixXd kinv = lp.transpose() * rob.solve(lp);
  if (kinv.allFinite()) kernel_inv_ = 0.5 * (kinv + kinv.transpose());
}

double ChangeScan::Ratio(const double* base, std::int64_t w) {
  return statistic_(design_.q, design_.equations(), current_.data(), base, w, kernel_inv_.data(),
                    work_.data());
}

void ChangeScan::Push(const ScanRow& row) {
  const int q = design_.q;
  ++rows_;
  if (++ring_pos_ == ring_rows_) ring_pos_ = 0;
  double* v = current_.data() + q;
  for (int i = 0; i < q; ++i) {
    current_[i] += row.s[i];
    for (int j = 0; j <= i; ++j) {
      v[Packed(i, j)] += row.v[Packed(i, j)];
      pooled_ss_(i, j) += row.s[i] * row.s[j];
      pooled_v_(i, j) += row.v[Packed(i, j)];
    }
  }
  current_[q + PackedSize(q)] += row.r;
  pooled_r_ += row.r;
  ++pooled_rows_;
  std::copy(current_.begin(), current_.end(), ring_.begin() + ring_pos_ * record_);
  if (rows_ % kKernelStride == 0) {
    // The loops above fill the lower triangles only.
    pooled_ss_ = pooled_ss_.selfadjointView<Eigen::Lower>();
    pooled_v_ = pooled_v_.selfadjointView<Eigen::Lower>();
    RefreshKernel();
  }
}

std::int64_t ChangeScan::Stride(std::int64_t w) const {
  return std::max<std::int64_t>(1, w / design_.stride_divisor);
}

// Schedule: grid window j is due on rows that are multiples of its stride (a countdown, no
// division per row) once it fits after the arming row; the growing "since arming" candidate is
// due first at w_0 rows and then Stride(w) rows after each evaluation.
template <typename Visit>
void ChangeScan::ForEachDue(Visit visit) {
  const int grid = static_cast<int>(design_.windows.size());
  for (int j = 0; j < grid; ++j) {
    if (--countdown_[j] > 0) continue;
    countdown_[j] = stride_[j];
    const std::int64_t w = design_.windows[j];
    if (w >= rows_) continue;  // tau = n - w must lie after the arming row
    std::int64_t pos = ring_pos_ - w;
    if (pos < 0) pos += ring_rows_;
    visit(j, ring_.data() + pos * record_, w);
  }
  if (design_.since_arming && rows_ >= next_arming_) {
    visit(grid, zero_.data(), rows_);
    next_arming_ = rows_ + Stride(rows_);
  }
}

ScanValue ChangeScan::Add(const ScanRow& row) {
  Push(row);
  ForEachDue([&](int slot, const double* base, std::int64_t w) {
    const double x = Ratio(base, w);
    held_[slot] = x < 0.0 ? kNone : static_cast<double>(w) * std::log1p(x) - Penalty(slot, w);
    held_window_[slot] = w;
  });
  ScanValue out;
  for (std::size_t j = 0; j < held_.size(); ++j) {
    if (held_[j] == kNone) continue;
    if (!out.available || held_[j] > out.statistic) {
      out.available = true;
      out.statistic = held_[j];
      out.window = held_window_[j];
    }
  }
  return out;
}

double ChangeScan::AddAbove(const ScanRow& row, double floor) {
  Push(row);
  double best = floor;
  ForEachDue([&](int slot, const double* base, std::int64_t w) {
    const double x = Ratio(base, w);
    if (x < 0.0) return;
    const double wd = static_cast<double>(w);
    const double pen = Penalty(slot, w);
    if (wd * x - pen <= best) return;  // L = w ln(1 + x) <= w x
    best = std::max(best, wd * std::log1p(x) - pen);
  });
  return best;
}

double ChangeScan::Penalty(int slot, std::int64_t w) const {
  if (slot < static_cast<int>(penalty_.size())) return penalty_[slot];
  return ScalePenalty(design_, w);
}

double ScalePenalty(const ScanDesign& design, std::int64_t w) {
  if (design.scale_penalty == 0.0 || w >= design.horizon_rows) return 0.0;
  return design.scale_penalty *
         std::log(static_cast<double>(design.horizon_rows) / static_cast<double>(w));
}

// ---------------------------------------------------------------------------------------------
// Calibration

namespace {

// One simulated row: u ~ N(0, I_{n_e}), x~ ~ N(0, I_c), z_a = B_a x~.
void DrawRow(const ScanDesign& design, DeterministicRandom* rng, Eigen::VectorXd* u,
             Eigen::VectorXd* x, Eigen::MatrixXd* z) {
  for (Eigen::Index i = 0; i < u->size(); ++i) (*u)[i] = rng->Normal();
  for (Eigen::Index i = 0; i < x->size(); ++i) (*x)[i] = rng->Normal();
  for (int a = 0; a < design.equations(); ++a) {
    const Eigen::MatrixXd& b = design.blocks[a];
    for (Eigen::Index i = 0; i < b.rows(); ++i) {
      double v = 0.0;
      for (Eigen::Index c = 0; c < b.cols(); ++c) v += b(i, c) * (*x)[c];
      (*z)(i, a) = v;
    }
  }
}

}  // namespace

std::vector<double> SimulateScanMaxima(const ScanDesign& design, int paths, std::uint64_t seed) {
  const int q = design.q;
  const int ne = design.equations();
  DeterministicRandom rng(seed);
  ChangeScan scan(design);
  std::vector<double> maxima(static_cast<std::size_t>(std::max(paths, 0)), 0.0);
  Eigen::VectorXd u(ne), x(design.blocks[0].cols());
  Eigen::MatrixXd z(q, ne), om, pooled_ss, pooled_v;
  ScanRow row;
  for (int path = 0; path < paths; ++path) {
    ScanTraining training(q, ne);
    for (std::int64_t t = 0; t < design.training_scores; ++t) {
      DrawRow(design, &rng, &u, &x, &z);
      training.Add(u, z);
    }
    double pooled_r = 0.0;
    if (!training.Finish(&om, &pooled_ss, &pooled_v, &pooled_r)) continue;  // contributes 0
    const ScanScores scores(q, om);
    scan.Start(pooled_ss, pooled_v, pooled_r, training.rows());
    double best = kNone;
    for (std::int64_t t = 0; t < design.horizon_rows; ++t) {
      DrawRow(design, &rng, &u, &x, &z);
      scores.Build(u, z, &row);
      best = scan.AddAbove(row, best);
    }
    maxima[static_cast<std::size_t>(path)] = best == kNone ? 0.0 : best;
  }
  return maxima;
}

namespace {

double UpperQuantile(const std::vector<double>& sorted, double alpha) {
  const auto paths = static_cast<std::int64_t>(sorted.size());
  auto allowed = static_cast<std::int64_t>(std::floor(alpha * static_cast<double>(paths) + 1e-9));
  allowed = std::clamp<std::int64_t>(allowed, 1, paths);
  return sorted[static_cast<std::size_t>(paths - allowed)];
}

}  // namespace

ScanThresholds CalibrateScan(const ScanDesign& design, double warn_alpha, double critical_alpha,
                             int paths, std::uint64_t seed) {
  std::vector<double> maxima = SimulateScanMaxima(design, paths, seed);
  std::sort(maxima.begin(), maxima.end());
  ScanThresholds out;
  out.paths = paths;
  out.warn = UpperQuantile(maxima, warn_alpha);
  out.critical = UpperQuantile(maxima, critical_alpha);
  return out;
}

ScanThresholds CachedScanThresholds(const ScanDesign& design, double warn_alpha,
                                    double critical_alpha, int paths, std::uint64_t seed) {
  std::ostringstream key;
  key << std::hexfloat << design.q << '/' << design.training_scores << '/' << design.horizon_rows
      << '/' << design.min_window << '/' << design.stride_divisor << '/' << design.since_arming
      << '/' << design.scale_penalty << '/' << warn_alpha << '/' << critical_alpha << '/' << paths
      << '/' << seed << '/';
  for (std::int64_t w : design.windows) key << w << ',';
  for (const Eigen::MatrixXd& b : design.blocks) {
    key << '[' << b.rows() << 'x' << b.cols();
    for (Eigen::Index i = 0; i < b.size(); ++i) key << ' ' << b.data()[i];
    key << ']';
  }
  static std::mutex mutex;
  static auto* cache = new std::map<std::string, ScanThresholds>;
  {
    std::lock_guard<std::mutex> lock(mutex);
    auto it = cache->find(key.str());
    if (it != cache->end()) return it->second;
  }
  // Computed outside the lock; two threads may both compute the same (identical) result.
  const ScanThresholds t = CalibrateScan(design, warn_alpha, critical_alpha, paths, seed);
  std::lock_guard<std::mutex> lock(mutex);
  cache->emplace(key.str(), t);
  return t;
}

// ---------------------------------------------------------------------------------------------
// RestrictionMonitorOptions

std::int64_t RestrictionMonitorOptions::MinWindow(int q) const {
  return min_window > 0 ? min_window : std::max<std::int64_t>(kDefaultMinWindow, 10 * q);
}

bool RestrictionMonitorOptions::IsValid(int q, const VarSpec& spec, std::string* why) const {
  auto fail = [&](const std::string& msg) {
    if (why) *why = msg;
    return false;
  };
  if (q < 1) return fail("restriction monitor: the restriction needs at least one row");
  if (training_rows < spec.k() + 10) {
    return fail("restriction monitor: training_rows = " + std::to_string(training_rows) +
                " must be >= k + 10 = " + std::to_string(spec.k() + 10));
  }
  if (horizon_rows < 1) {
    return fail("restriction monitor: horizon_rows = " + std::to_string(horizon_rows) +
                " must be >= 1");
  }
  if (!(false_alarm > 0.0 && false_alarm <= 0.5)) {
    return fail("restriction monitor: false_alarm = " + Fmt(false_alarm) + " must lie in (0, 0.5]");
  }
  if (!(warn_false_alarm >= false_alarm && warn_false_alarm <= 0.9)) {
    return fail("restriction monitor: warn_false_alarm = " + Fmt(warn_false_alarm) +
                " must lie in [false_alarm, 0.9]");
  }
  if (min_window != 0 && min_window < q + 1) {
    return fail("restriction monitor: min_window = " + std::to_string(min_window) +
                " must be 0 (default) or >= q + 1 = " + std::to_string(q + 1));
  }
  if (!(window_ratio > 1.0 && window_ratio <= 16.0)) {
    return fail("restriction monitor: window_ratio = " + Fmt(window_ratio) +
                " must lie in (1, 16]");
  }
  if (!(scale_penalty >= 0.0 && scale_penalty <= 10.0)) {
    return fail("restriction monitor: scale_penalty = " + Fmt(scale_penalty) +
                " must lie in [0, 10]");
  }
  if (stride_divisor < 1) {
    return fail("restriction monitor: stride_divisor = " + std::to_string(stride_divisor) +
                " must be >= 1");
  }
  if (!(calibration_paths >= 1 && false_alarm * calibration_paths >= 20.0)) {
    return fail("restriction monitor: calibration_paths = " + std::to_string(calibration_paths) +
                " must satisfy false_alarm * paths >= 20");
  }
  return true;
}

// ---------------------------------------------------------------------------------------------
// RestrictionMonitor

Status RestrictionMonitor::Create(const VarSpec& spec, LinearRestriction restriction,
                                  const RestrictionMonitorOptions& options,
                                  RestrictionMonitor* out) {
  std::string why;
  if (!spec.IsValid(&why)) return Status::InvalidArgument(why);
  LinearRestriction checked;
  Status st = UserRestriction(spec, restriction.name, std::move(restriction.r_matrix),
                              std::move(restriction.r_value), &checked);
  if (!st.ok()) return st;
  if (checked.r_matrix.isZero(0.0)) {
    return Status::InvalidArgument("restriction '" + checked.name +
                                   "': R is zero; it restricts no coefficient");
  }
  const int q = static_cast<int>(checked.r_matrix.rows());
  if (!options.IsValid(q, spec, &why)) return Status::InvalidArgument(why);

  RestrictionMonitor m;
  m.spec_ = spec;
  m.restriction_ = std::move(checked);
  m.options_ = options;
  ScanDesign design =
      MakeScanDesign(spec, m.restriction_, options.training_rows, options.horizon_rows,
                     options.MinWindow(q), options.window_ratio);
  design.stride_divisor = options.stride_divisor;
  design.scale_penalty = options.scale_penalty;
  if (!design.IsValid(&why)) return Status::InvalidArgument("restriction monitor: " + why);
  m.thresholds_ = CachedScanThresholds(design, options.warn_false_alarm, options.false_alarm,
                                       options.calibration_paths, options.seed);
  const int k = spec.k();
  for (int i = 0; i < spec.n(); ++i) {
    if (!m.restriction_.r_matrix.middleCols(i * k, k).isZero(0.0)) m.equations_.push_back(i);
  }
  m.training_ = ScanTraining(q, static_cast<int>(m.equations_.size()));
  m.scan_ = ChangeScan(std::move(design));
  *out = std::move(m);
  return Status::Ok();
}

void RestrictionMonitor::Reset() {
  last_rows_ = 0;
  has_previous_ = false;
  last_ = RestrictionReading();
  training_ = ScanTraining(scan_.design().q, static_cast<int>(equations_.size()));
  scan_ = ChangeScan(scan_.design());
}

namespace {

Status CheckRestrictionShape(const VarEstimator& est, const LinearRestriction& restriction) {
  if (restriction.r_matrix.cols() != est.n() * est.k() ||
      restriction.r_value.size() != restriction.r_matrix.rows()) {
    return Status::InvalidArgument("restricted coefficients: R must be q x (n k), r of size q");
  }
  return Status::Ok();
}

}  // namespace

Status RestrictedCoefficients(const VarEstimator& est, const LinearRestriction& restriction,
                              Eigen::MatrixXd* restricted) {
  Status st = CheckRestrictionShape(est, restriction);
  if (!st.ok()) return st;
  Eigen::MatrixXd phi;
  st = est.Coefficients(&phi);
  if (!st.ok()) return st;
  return RestrictedCoefficients(est, restriction, phi, restricted);
}

Status RestrictedCoefficients(const VarEstimator& est, const LinearRestriction& restriction,
                              const Eigen::MatrixXd& unrestricted, Eigen::MatrixXd* restricted) {
  const int k = est.k();
  const int n = est.n();
  const Eigen::MatrixXd& rm = restriction.r_matrix;
  Status shape = CheckRestrictionShape(est, restriction);
  if (!shape.ok()) return shape;
  if (unrestricted.rows() != n || unrestricted.cols() != k) {
    return Status::InvalidArgument("restricted coefficients: the coefficients must be n x k");
  }
  Eigen::MatrixXd phi = unrestricted;
  const auto r11 = est.factor().R().topLeftCorner(k, k).triangularView<Eigen::Upper>();
  const Eigen::Index q = rm.rows();
  std::vector<Eigen::MatrixXd> g(static_cast<std::size_t>(n));
  Eigen::MatrixXd middle = Eigen::MatrixXd::Zero(q, q);
  Eigen::VectorXd departure = -restriction.r_value;
  for (int i = 0; i < n; ++i) {
    const auto ri = rm.middleCols(i * k, k);
    if (ri.isZero(0.0)) continue;
    // g_i = A R_i' = R11^{-1} R11^{-T} R_i', one column at a time: Eigen's solve with a matrix
    // right-hand side goes through its blocked (GEMM) kernels, dearer than the arithmetic here.
    g[i] = ri.transpose();
    for (Eigen::Index c = 0; c < q; ++c) {
      auto col = g[i].col(c);
      r11.transpose().solveInPlace(col);
      r11.solveInPlace(col);
    }
    middle.noalias() += ri * g[i];
    departure.noalias() += ri * phi.row(i).transpose();
  }
  Eigen::LDLT<Eigen::MatrixXd> ldlt(0.5 * (middle + middle.transpose()));
  const double top = middle.diagonal().cwiseAbs().maxCoeff();
  if (ldlt.info() != Eigen::Success || !(ldlt.vectorD().minCoeff() > kPivotFraction * top)) {
    return Status::RankDeficient("restriction '" + restriction.name +
                                 "': R (I (x) A) R' is singular (redundant rows of R)");
  }
  const Eigen::VectorXd lambda = ldlt.solve(departure);
  for (int i = 0; i < n; ++i) {
    if (g[i].size() > 0) phi.row(i) -= (g[i] * lambda).transpose();
  }
  if (!phi.allFinite()) return Status::Numerical("restricted coefficients are not finite");
  *restricted = std::move(phi);
  return Status::Ok();
}

// u_a = (y_i - phi~_{i, t-1} x) / sqrt(f) for the a-th touched equation i (the restricted
// estimate before this row), z_a = R_i x.
bool RestrictionMonitor::Residuals(const VarEstimator& reference, const UpdateResult& update,
                                   Eigen::VectorXd* u, Eigen::MatrixXd* z) const {
  if (!has_previous_ || !update.has_prediction || !(update.prediction_scale >= 1.0)) return false;
  const int k = spec_.k();
  const auto& buf = reference.buffer();
  const Eigen::VectorXd row = buf.Row(buf.size() - 1);
  const auto x = row.head(k);
  const double scale = 1.0 / std::sqrt(update.prediction_scale);
  const auto ne = static_cast<Eigen::Index>(equations_.size());
  u->resize(ne);
  z->resize(restriction_.r_matrix.rows(), ne);
  for (Eigen::Index a = 0; a < ne; ++a) {
    const int i = equations_[a];
    (*u)[a] = (row[k + i] - previous_.row(a).dot(x)) * scale;
    z->col(a).noalias() = restriction_.r_matrix.middleCols(i * k, k) * x;
  }
  return u->allFinite() && z->allFinite();
}

bool RestrictionMonitor::Arm() {
  Eigen::MatrixXd om, pooled_ss, pooled_v;
  double pooled_r = 0.0;
  if (!training_.Finish(&om, &pooled_ss, &pooled_v, &pooled_r)) return false;
  scores_ = ScanScores(scan_.design().q, om);
  scan_.Start(pooled_ss, pooled_v, pooled_r, training_.rows());
  return true;
}

void RestrictionMonitor::RollingWald(const CovarianceContext* tracking,
                                     RestrictionReading* reading) const {
  if (tracking == nullptr) return;
  reading->has_wald = true;
  if (tracking->phi().rows() != spec_.n() || tracking->phi().cols() != spec_.k()) {
    reading->wald_status = Status::InvalidArgument("restriction '" + restriction_.name +
                                                   "': the tracking covariance has another shape");
    return;
  }
  reading->wald_status =
      WaldTest(tracking->theta(), restriction_, tracking->Restricted(restriction_.r_matrix),
               tracking->info().dof, &reading->wald);
}

void RestrictionMonitor::FillAlarm(const ScanValue& value, RestrictionReading* reading) const {
  MonitorReading& a = reading->alarm;
  a.armed = value.available;
  a.statistic = value.statistic;
  a.warn = thresholds_.warn;
  a.critical = thresholds_.critical;
  a.clear = thresholds_.warn;
  reading->change_window = value.window;
  // The full text only where an alert can be raised (armed, at or above warn: alert.cc); below
  // it a short status line, so an ordinary row does not format a paragraph.
  if (!value.available || !(value.statistic >= thresholds_.warn)) {
    a.explanation = "Restriction '" + restriction_.name + "': change scan below warn";
    return;
  }
  std::ostringstream text;
  text << "Restriction '" << restriction_.name << "' (" << restriction_.r_matrix.rows()
       << (restriction_.r_matrix.rows() == 1 ? " row" : " rows")
       << ") may no longer hold: its change scan reads " << Fmt(value.statistic) << " (warn "
       << Fmt(thresholds_.warn) << ", critical " << Fmt(thresholds_.critical)
       << "; while the restriction holds the critical level is reached with chance "
       << Fmt(100.0 * options_.false_alarm, 3) << "% within " << options_.horizon_rows
       << " rows), strongest over the last " << value.window
       << " rows; check the rolling Wald p-value and which entries of R theta - r moved.";
  a.explanation = text.str();
}

Status RestrictionMonitor::Observe(const VarEstimator& reference, const UpdateResult& update,
                                   const CovarianceContext* tracking, RestrictionReading* reading) {
  if (reference.n() != spec_.n() || reference.k() != spec_.k()) {
    return Status::InvalidArgument("restriction '" + restriction_.name +
                                   "': the reference estimator has another shape");
  }
  if (reference.spec().window.kind != WindowKind::kExpanding) {
    return Status::InvalidArgument("restriction '" + restriction_.name +
                                   "': the reference estimator must use the expanding window");
  }
  if (!update.status.ok() || !update.estimated) {
    *reading = last_;
    return Status::Ok();
  }
  const std::int64_t n = reference.rows_in_window();
  if (n < last_rows_) Reset();
  last_rows_ = n;

  RestrictionReading r;
  r.rows_since_reset = n;
  RollingWald(tracking, &r);
  // Score this row against the restricted estimate before it, then move that estimate on.
  Eigen::VectorXd u;
  Eigen::MatrixXd z;
  const bool scored = Residuals(reference, update, &u, &z);
  Eigen::MatrixXd phi;
  has_previous_ = false;
  if (reference.Coefficients(&phi).ok()) {
    const int k = spec_.k();
    r.departure = -restriction_.r_value;
    for (int i : equations_) {
      r.departure.noalias() += restriction_.r_matrix.middleCols(i * k, k) * phi.row(i).transpose();
    }
    Eigen::MatrixXd restricted;
    restricted_status_ = RestrictedCoefficients(reference, restriction_, phi, &restricted);
    has_previous_ = restricted_status_.ok();
    if (has_previous_) {
      previous_.resize(static_cast<Eigen::Index>(equations_.size()), k);
      for (std::size_t a = 0; a < equations_.size(); ++a) {
        previous_.row(static_cast<Eigen::Index>(a)) = restricted.row(equations_[a]);
      }
    }
  }
  auto unarmed = [&](const std::string& why) {
    r.alarm.armed = false;
    r.alarm.explanation = "Restriction '" + restriction_.name + "': " + why;
    r.scanned_rows = scan_.rows();
    last_ = r;
    *reading = r;
    return Status::Ok();
  };
  const std::int64_t m = options_.training_rows;
  if (!scan_.started()) {
    if (scored) training_.Add(u, z);
    if (n < m) {
      return unarmed("training, " + std::to_string(n) + " of " + std::to_string(m) + " rows");
    }
    if (!Arm()) {
      return unarmed("cannot arm yet: " + std::to_string(training_.rows()) +
                     " training residuals with a degenerate covariance");
    }
    return unarmed("scan armed at row " + std::to_string(n) + "; readings start next row");
  }
  if (!scored) {
    return unarmed(restricted_status_.ok()
                       ? "no usable one-step prediction for row " + std::to_string(n) + "; skipped"
                       : "row " + std::to_string(n) + " skipped: " + restricted_status_.ToString());
  }
  ScanRow row;
  scores_.Build(u, z, &row);
  const ScanValue value = scan_.Add(row);
  r.scanned_rows = scan_.rows();
  r.within_horizon = r.scanned_rows <= options_.horizon_rows;
  FillAlarm(value, &r);
  last_ = r;
  *reading = r;
  return Status::Ok();
}

}  // namespace rimwatch
