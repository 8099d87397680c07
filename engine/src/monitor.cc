#include "rimwatch/engine/monitor.h"

#include <algorithm>
#include <bit>
#include <cmath>
#include <cstdio>
#include <limits>
#include <map>
#include <mutex>
#include <sstream>

#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/constancy.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/cusum.h"
#include "rimwatch/engine/diagnostics.h"
#include "rimwatch/engine/restriction_monitor.h"
#include "rimwatch/engine/stability_monitor.h"
#include "rimwatch/engine/transform.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/volatility_monitor.h"

namespace rimwatch {
namespace {

VarSpec ReferenceSpec(const VarSpec& var) {
  VarSpec ref = var;
  ref.window = WindowOptions();
  ref.window.kind = WindowKind::kExpanding;
  ref.window.robust_row_cap = 1;  // recursive residuals need no row buffer
  return ref;
}

Status BuildRestriction(const ModelSpec& spec, const RestrictionSpec& r, LinearRestriction* out) {
  Status st;
  switch (r.kind) {
    case RestrictionKind::kGranger: {
      std::vector<int> cause, effect;
      for (const auto& v : r.cause) cause.push_back(spec.var.VariableIndex(v));
      for (const auto& v : r.effect) effect.push_back(spec.var.VariableIndex(v));
      st = GrangerRestriction(spec.var, cause, effect, out);
      break;
    }
    case RestrictionKind::kExcludeLag:
      st = ExcludeLagRestriction(spec.var, r.lag, out);
      break;
    case RestrictionKind::kMatrix:
      st = UserRestriction(spec.var, r.name, r.r_matrix, r.r_value, out);
      break;
  }
  out->name = r.name;
  return st;
}

// The volatility monitor's thresholds depend on (n, options) only, and simulating them costs
// P (m + H) n normals (tens of milliseconds). One calibrated, never-fed monitor per design is
// kept in the process and copied (a mutex guards the cache, as in restriction_monitor.cc), so
// creating many models of one shape pays the simulation once; the copy is bit-identical to a
// freshly calibrated monitor.
VolatilityMonitor CalibratedVolatilityMonitor(const std::vector<std::string>& variables,
                                              const VolatilityMonitorOptions& o) {
  std::ostringstream key;
  key << std::hexfloat << o.training << '/' << o.horizon << '/' << o.false_alarm << '/'
      << o.warn_false_alarm << '/' << o.delta << '/' << o.calibration_paths << '/' << o.seed;
  for (const std::string& v : variables) key << '/' << v;
  static std::mutex mutex;
  static auto* cache = new std::map<std::string, VolatilityMonitor>;
  {
    std::lock_guard<std::mutex> lock(mutex);
    auto it = cache->find(key.str());
    if (it != cache->end()) return it->second;
  }
  // Calibrated outside the lock; two threads may both compute the same (identical) monitor.
  VolatilityMonitor fresh(variables, o);
  std::lock_guard<std::mutex> lock(mutex);
  cache->emplace(key.str(), fresh);
  return fresh;
}

// The reference samples of a model's monitors: each monitor reads an expanding estimator of the
// rows since it (re)started. Estimators fed the same rows from the same start are identical, bit
// for bit, so monitors that started on the same row share one: the model pays one update per
// distinct start instead of one per monitor (at the start of a model, one for the CUSUM,
// volatility and restriction monitors, one for the constancy monitors, whose samples also hold
// the presample rows).
// Invariant: every sample holds exactly the rows given to Update since the Join that created
// it; a sample is shared only while it holds no row yet (Join reuses an empty one).
class ReferenceSamples {
 public:
  struct Sample {
    explicit Sample(VarSpec spec) : estimator(std::move(spec)) {}
    VarEstimator estimator;
    UpdateResult last;  // of the latest Update
    int users = 0;
  };

  // spec: the expanding reference spec of the model (ReferenceSpec).
  explicit ReferenceSamples(VarSpec spec) : spec_(std::move(spec)) {}

  // A sample that takes rows from the next Update on, keeping at least `row_cap` rows for robust
  // covariances. The caller owns one use of it until Leave.
  Sample* Join(std::size_t row_cap) {
    for (const auto& s : samples_) {
      if (s->estimator.observations() != 0) continue;
      if (s->estimator.spec().window.robust_row_cap < row_cap) {
        VarSpec wider = s->estimator.spec();  // empty: rebuilding it changes nothing
        wider.window.robust_row_cap = row_cap;
        s->estimator = VarEstimator(wider);
      }
      ++s->users;
      return s.get();
    }
    VarSpec spec = spec_;
    spec.window.robust_row_cap = row_cap;
    samples_.push_back(std::make_unique<Sample>(spec));
    samples_.back()->users = 1;
    return samples_.back().get();
  }
  void Leave(Sample* sample) {
    if (--sample->users > 0) return;
    samples_.erase(std::find_if(samples_.begin(), samples_.end(),
                                [&](const auto& s) { return s.get() == sample; }));
  }
  // Folds y into every sample (in join order).
  void Update(const Eigen::VectorXd& y) {
    for (const auto& s : samples_) s->last = s->estimator.Update(y);
  }

 private:
  VarSpec spec_;
  std::vector<std::unique_ptr<Sample>> samples_;
};

using Sample = ReferenceSamples::Sample;

// The numbers of a reading that a log keeps (MonitorSample::changed), compared bit for bit so
// that a NaN equals itself and -0.0 differs from 0.0. A default one differs from every reading.
struct LoggedReading {
  LoggedReading() = default;
  explicit LoggedReading(const MonitorReading& r)
      : valid(true), armed(r.armed), bits{Bits(r.statistic), Bits(r.warn), Bits(r.critical)} {}
  bool Same(const MonitorReading& r) const {
    return valid && armed == r.armed && bits[0] == Bits(r.statistic) && bits[1] == Bits(r.warn) &&
           bits[2] == Bits(r.critical);
  }
  static std::uint64_t Bits(double v) { return std::bit_cast<std::uint64_t>(v); }
  bool valid = false;
  bool armed = false;
  std::uint64_t bits[3] = {0, 0, 0};
};

// A sequential monitor on the recursive residuals of its reference sample (nullptr until the
// model's first estimated row: the sample starts there, without the presample rows).
template <typename M>
struct Sequential {
  Sample* reference = nullptr;
  M monitor;
  AlertTracker tracker;
};

// A monitored restriction's alarm: its reference sample, scan and tracker.
struct RestrictionAlarm {
  Sample* reference = nullptr;
  RestrictionMonitor monitor;
  AlertTracker tracker;
};

// A parameter-constancy monitor: its reference sample (expanding since its start, presample
// rows included), the block-wise test of constancy.h and its tracker. The recent sample is the
// Impl's constancy_recent window, shared by both tests.
struct ConstancyAlarm {
  Sample* reference = nullptr;
  std::size_t row_cap = 1;  // rows its sample keeps (the equality test's robust covariance)
  ConstancyMonitor monitor;
  AlertTracker tracker;
};

}  // namespace

struct Monitor::Impl {
  ModelSpec spec;
  RowTransformer transformer;
  VarEstimator tracking;
  ReferenceSamples references;
  StabilityMonitor stability;
  AlertTracker stability_tracker;
  // The last row's companion eigenvalues in the solver's order: the next row's QR shifts
  // (ComputeCompanionSpectrum). Part of the model's state, so a replay reproduces every bit.
  Eigen::VectorXcd eigen_shifts;
  // The covariance context and spectrum (with gradient) of the last robust row, for Summary on
  // that row (a snapshot at the robust cadence then reuses them instead of computing them again).
  struct RobustParts {
    std::int64_t row = 0;  // model row they belong to
    CovarianceContext ctx;
    CompanionSpectrum spectrum;
  };
  std::optional<RobustParts> robust_parts;
  std::unique_ptr<Sequential<CusumMonitor>> cusum;
  std::unique_ptr<Sequential<VolatilityMonitor>> volatility;
  std::vector<LinearRestriction> restrictions;
  std::vector<std::unique_ptr<RestrictionAlarm>> restriction_alarms;
  // Constancy: a sliding window of B rows (the recent sample of both tests, never reset) and
  // one alarm per enabled test.
  std::unique_ptr<VarEstimator> constancy_recent;
  std::vector<std::unique_ptr<ConstancyAlarm>> constancy_alarms;
  // Residual diagnostics: advisory, one tracker per test line, evaluated on non-overlapping
  // blocks of training_rows rows; the last reading is held between evaluations.
  std::vector<std::unique_ptr<AlertTracker>> diagnostic_trackers;
  std::vector<MonitorReading> diagnostic_readings;
  double diagnostic_alpha = 0.0;        // Bonferroni level per line and evaluation
  std::vector<AlertTracker*> trackers;  // event order, for ActiveAlerts
  std::map<std::string, AlertEvent> active;
  std::vector<LoggedReading> previous;  // each monitor's reading on the previous row
  std::int64_t rows = 0;
  std::optional<double> rho_se;

  explicit Impl(const ModelSpec& s)
      : spec(s),
        transformer(s.var.variables, s.transforms),
        tracking(s.var),
        references(ReferenceSpec(s.var)),
        stability(s.stability) {}

  AlertRule Rule() const { return AlertRule{spec.alarms.hysteresis, spec.alarms.cooldown}; }
  // Feeds one monitor's reading of this row to its tracker: the reading goes into
  // report->readings and the transition, if any, into report->events. Called once per tracker
  // per estimated row, in the order of `trackers`.
  std::optional<AlertEvent> Observe(AlertTracker* tracker, const MonitorReading& reading,
                                    RowReport* report);
  void Record(const std::optional<AlertEvent>& ev, RowReport* report);
  void Estimate(RowReport* report);
  void RunDiagnostics(RowReport* report);
  void RunRestrictions(RowReport* report);
  void RunConstancy(const Eigen::VectorXd& y, RowReport* report);
  void ConstancyPresample(const Eigen::VectorXd& y);
  Status AddConstancy();  // builds the constancy monitors of spec.constancy
  template <typename M>
  void RunSequential(Sequential<M>* seq, RowReport* report);
  // A fresh reference sample for *slot, from the next row on (after a critical alarm).
  void Restart(Sample** slot, std::size_t row_cap) {
    Sample* fresh = references.Join(row_cap);
    if (*slot != nullptr) references.Leave(*slot);
    *slot = fresh;
  }
};

std::optional<AlertEvent> Monitor::Impl::Observe(AlertTracker* tracker,
                                                 const MonitorReading& reading, RowReport* report) {
  // The sample keeps the numbers only; the explanation text (built for an alert) goes into the
  // event when one is raised, and copying it per monitor per row was a large share of a row.
  const std::size_t index = report->readings.size();
  MonitorSample& sample = report->readings.emplace_back();
  sample.monitor = tracker->interned_monitor();
  sample.reading.armed = reading.armed;
  sample.reading.statistic = reading.statistic;
  sample.reading.warn = reading.warn;
  sample.reading.critical = reading.critical;
  sample.reading.clear = reading.clear;
  if (index >= previous.size()) previous.resize(index + 1);
  sample.changed = !previous[index].Same(reading);
  previous[index] = LoggedReading(reading);
  std::optional<AlertEvent> ev = tracker->Observe(rows, report->period, reading);
  Record(ev, report);
  return ev;
}

void Monitor::Impl::Record(const std::optional<AlertEvent>& ev, RowReport* report) {
  if (!ev) return;
  if (ev->raised) {
    active[ev->monitor] = *ev;
  } else {
    active.erase(ev->monitor);
  }
  report->events.push_back(*ev);
}

void Monitor::Impl::Estimate(RowReport* report) {
  Eigen::MatrixXd phi;
  report->estimate_status = tracking.Coefficients(&phi);
  const bool robust = rows % spec.inference.every == 0;
  bool armed = rows > spec.training_rows;
  if (report->estimate_status.ok()) {
    CompanionSpectrum spectrum;
    if (ComputeCompanionSpectrum(spec.var, phi, robust, &spectrum, &eigen_shifts).ok()) {
      report->has_spectral_radius = true;
      report->spectral_radius = spectrum.spectral_radius;
    }
    robust_parts.reset();
    CovarianceContext ctx;
    if (robust && CovarianceContext::Create(tracking, spec.inference.covariance, &ctx).ok()) {
      report->robust_row = true;
      rho_se.reset();
      if (spectrum.gradient_status.ok()) {
        const double var = ctx.Restricted(spectrum.gradient.transpose())(0, 0);
        if (var >= 0.0) rho_se = std::sqrt(var);
      }
      const Eigen::VectorXd theta = ctx.theta();
      for (const LinearRestriction& r : restrictions) {
        RestrictionRow out;
        out.name = r.name;
        out.status = WaldTest(theta, r, ctx.Restricted(r.r_matrix), ctx.info().dof, &out.wald);
        report->restrictions.push_back(std::move(out));
      }
      if (report->has_spectral_radius) {
        robust_parts = RobustParts{rows, std::move(ctx), std::move(spectrum)};
      }
    }
  }
  report->rho_se = rho_se;
  armed = armed && report->has_spectral_radius;
  MonitorReading reading =
      stability.Observe(report->spectral_radius, rho_se, armed, stability_tracker.level());
  report->rows_to_unit = stability.rows_to_unit();
  Observe(&stability_tracker, reading, report);
}

// Restriction alarms: the scan of restriction_monitor.h on each restriction's reference
// estimator (the rolling Wald path is computed once, in Estimate). After a critical alarm the
// scan restarts on a fresh reference sample, like the other sequential monitors.
void Monitor::Impl::RunRestrictions(RowReport* report) {
  for (const auto& ra : restriction_alarms) {
    RestrictionReading reading;
    ra->monitor.Observe(ra->reference->estimator, ra->reference->last, nullptr, &reading);
    const std::optional<AlertEvent> ev = Observe(&ra->tracker, reading.alarm, report);
    if (ev && ev->raised && ev->level == AlertLevel::kCritical) {
      Restart(&ra->reference, 1);
      ra->monitor.Reset();
    }
  }
}

// Constancy monitors (constancy.h) on the shared recent window and their own reference. A
// monitor restarts on a fresh reference after a critical alarm; the equality test also restarts
// when its horizon is used up (its reference sample, and the rows kept for its covariance, stay
// within training + horizon rows). The Nyblom-Hansen test needs no reference sample and runs on.
void Monitor::Impl::RunConstancy(const Eigen::VectorXd& y, RowReport* report) {
  if (!constancy_recent) return;
  constancy_recent->Update(y, /*predict=*/false);
  for (const auto& ca : constancy_alarms) {
    ConstancyReading reading;
    const Status st = ca->monitor.Observe(*constancy_recent, ca->reference->estimator, &reading);
    if (!st.ok()) {  // cannot happen: both estimators are built from the validated spec
      reading.alarm.armed = false;
      reading.alarm.explanation = "Parameter constancy: " + st.ToString();
    }
    const std::optional<AlertEvent> ev = Observe(&ca->tracker, reading.alarm, report);
    const bool critical = ev && ev->raised && ev->level == AlertLevel::kCritical;
    const bool horizon_used =
        ca->monitor.options().test == ConstancyMonitorOptions::Test::kReferenceEquality &&
        reading.evaluated && reading.evaluation >= ca->monitor.options().Evaluations();
    if (critical || horizon_used) {
      Restart(&ca->reference, ca->row_cap);
      ca->monitor.Reset();
    }
  }
}

// The presample rows of the tracking estimator go into the constancy estimators as well, so
// that their row counts equal the model's (first cycle: evaluations at model rows m + j B). The
// sequential monitors have not joined yet (their samples start at the first estimated row).
void Monitor::Impl::ConstancyPresample(const Eigen::VectorXd& y) {
  if (!constancy_recent) return;
  constancy_recent->Update(y, /*predict=*/false);
  references.Update(y);
}

// Advisory diagnostics (see Monitor::Create for the false-alarm bound).
void Monitor::Impl::RunDiagnostics(RowReport* report) {
  if (rows % spec.training_rows == 0 && rows >= spec.training_rows) {
    ResidualSample sample;
    const bool have =
        WindowResiduals(tracking, static_cast<std::size_t>(spec.training_rows), &sample).ok();
    std::vector<DiagnosticLine> lines;
    if (have)
      lines = FlattenDiagnostics(RunResidualDiagnostics(sample, DiagnosticOptions()), spec.var);
    for (std::size_t i = 0; i < diagnostic_readings.size(); ++i) {
      MonitorReading& r = diagnostic_readings[i];
      r.armed = have && i < lines.size() && lines[i].status.ok();
      if (!r.armed) continue;
      const DiagnosticLine& d = lines[i];
      r.statistic = -std::log10(std::max(d.p_value, 1e-300));
      r.warn = r.clear = -std::log10(diagnostic_alpha);
      r.critical = std::numeric_limits<double>::infinity();  // advisory: warn level only
      char buf[256];
      std::snprintf(
          buf, sizeof buf,
          "%s%s%s p-value %.2g on the last %d rows (Bonferroni level %.2g): the residuals "
          "fail this misspecification check; standard errors, tests and alerts may be off.",
          d.name.c_str(), d.variable.empty() ? "" : " for ", d.variable.c_str(), d.p_value,
          spec.training_rows, diagnostic_alpha);
      r.explanation = buf;
    }
  }
  for (std::size_t i = 0; i < diagnostic_trackers.size(); ++i) {
    Observe(diagnostic_trackers[i].get(), diagnostic_readings[i], report);
  }
}

template <typename M>
void Monitor::Impl::RunSequential(Sequential<M>* seq, RowReport* report) {
  MonitorReading reading;
  seq->monitor.Observe(seq->reference->last, &reading);  // a refused residual: unarmed
  const std::optional<AlertEvent> ev = Observe(&seq->tracker, reading, report);
  if (ev && ev->raised && ev->level == AlertLevel::kCritical) {
    // Restart on a fresh reference sample: the old one no longer describes the process.
    Restart(&seq->reference, 1);
    seq->monitor.Reset();
  }
}

// Builds the constancy monitors of spec.constancy (see RunConstancy).
Status Monitor::Impl::AddConstancy() {
  if (!spec.constancy.any()) return Status::Ok();
  const std::int64_t block = spec.ConstancyBlockRows();
  VarSpec recent = spec.var;
  recent.window = WindowOptions();
  recent.window.kind = WindowKind::kSliding;
  recent.window.rows = static_cast<std::size_t>(block);
  constancy_recent = std::make_unique<VarEstimator>(recent);
  struct Enabled {
    bool on;
    ConstancyMonitorOptions::Test test;
  };
  for (const Enabled& e :
       {Enabled{spec.constancy.nyblom_hansen, ConstancyMonitorOptions::Test::kNyblomHansen},
        Enabled{spec.constancy.reference_equality,
                ConstancyMonitorOptions::Test::kReferenceEquality}}) {
    if (!e.on) continue;
    ConstancyMonitorOptions opt;
    opt.test = e.test;
    opt.training_rows = spec.training_rows;
    opt.horizon_rows = spec.HorizonRows();
    opt.block_rows = block;
    opt.false_alarm = spec.alarms.false_alarm;
    opt.warn_false_alarm = spec.alarms.warn_false_alarm;
    opt.covariance = spec.inference.covariance;
    // The reference sample counts rows; the equality test also needs every reference row for
    // its robust covariance (at most training + horizon rows before it restarts).
    const std::size_t row_cap =
        e.test == ConstancyMonitorOptions::Test::kReferenceEquality
            ? static_cast<std::size_t>(spec.training_rows + spec.HorizonRows())
            : 1;
    const std::string name = std::string("constancy.") + ConstancyTestName(e.test);
    auto alarm = std::make_unique<ConstancyAlarm>(
        ConstancyAlarm{references.Join(row_cap), row_cap, ConstancyMonitor(),
                       AlertTracker(spec.name, name, Rule())});
    const Status st = ConstancyMonitor::Create(recent, opt, &alarm->monitor);
    if (!st.ok()) return Status::InvalidArgument(name + ": " + st.message());
    constancy_alarms.push_back(std::move(alarm));
  }
  return Status::Ok();
}

Monitor::Monitor(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
Monitor::~Monitor() = default;

Status Monitor::Create(const ModelSpec& spec, std::unique_ptr<Monitor>* out) {
  std::string why;
  if (!spec.IsValid(&why)) return Status::InvalidArgument(why);
  auto impl = std::make_unique<Impl>(spec);
  impl->stability_tracker = AlertTracker(spec.name, "stability", impl->Rule());
  const int k = spec.var.k();
  const std::int64_t training = spec.training_rows - k;  // recursive residuals start after k rows

  CusumMonitorOptions copt;
  copt.training = training;
  copt.false_alarm = spec.alarms.false_alarm;
  copt.warn_false_alarm = spec.alarms.warn_false_alarm;
  if (!copt.IsValid(&why)) return Status::InvalidArgument("cusum: " + why);
  impl->cusum.reset(new Sequential<CusumMonitor>{nullptr, CusumMonitor(spec.var.variables, copt),
                                                 AlertTracker(spec.name, "cusum", impl->Rule())});

  VolatilityMonitorOptions vopt;
  vopt.training = training;
  vopt.horizon = spec.HorizonRows();
  vopt.false_alarm = spec.alarms.false_alarm;
  vopt.warn_false_alarm = spec.alarms.warn_false_alarm;
  if (!vopt.IsValid(spec.var.n(), &why)) return Status::InvalidArgument("volatility: " + why);
  impl->volatility.reset(new Sequential<VolatilityMonitor>{
      nullptr, CalibratedVolatilityMonitor(spec.var.variables, vopt),
      AlertTracker(spec.name, "volatility", impl->Rule())});

  for (const RestrictionSpec& r : spec.restrictions) {
    LinearRestriction restriction;
    Status st = BuildRestriction(spec, r, &restriction);
    if (!st.ok()) return st;
    RestrictionMonitorOptions ropt;
    ropt.training_rows = spec.training_rows;
    ropt.horizon_rows = spec.HorizonRows();
    ropt.false_alarm = spec.alarms.false_alarm;
    ropt.warn_false_alarm = spec.alarms.warn_false_alarm;
    auto alarm = std::make_unique<RestrictionAlarm>(
        RestrictionAlarm{nullptr, RestrictionMonitor(),
                         AlertTracker(spec.name, "restriction." + r.name, impl->Rule())});
    st = RestrictionMonitor::Create(spec.var, restriction, ropt, &alarm->monitor);
    if (!st.ok()) return Status::InvalidArgument("restriction '" + r.name + "': " + st.message());
    impl->restriction_alarms.push_back(std::move(alarm));
    impl->restrictions.push_back(std::move(restriction));
  }
  Status st = impl->AddConstancy();
  if (!st.ok()) return st;
  impl->trackers = {&impl->stability_tracker, &impl->cusum->tracker, &impl->volatility->tracker};
  for (const auto& ra : impl->restriction_alarms) impl->trackers.push_back(&ra->tracker);
  for (const auto& ca : impl->constancy_alarms) impl->trackers.push_back(&ca->tracker);
  // Diagnostics: the lines of FlattenDiagnostics, each tested every training_rows rows on the
  // last training_rows rows. With L lines and E = horizon / training_rows evaluations in the
  // horizon, testing each at warn_false_alarm / (L E) bounds the chance of any false advisory
  // within the horizon by warn_false_alarm (Bonferroni; conservative by design).
  const std::vector<DiagnosticLine> names = FlattenDiagnostics(ResidualDiagnostics(), spec.var);
  const double evaluations = std::max(1.0, std::floor(spec.alarms.horizon));
  impl->diagnostic_alpha =
      spec.alarms.warn_false_alarm / (static_cast<double>(names.size()) * evaluations);
  for (const DiagnosticLine& d : names) {
    impl->diagnostic_trackers.push_back(std::make_unique<AlertTracker>(
        spec.name, "diagnostics." + d.name + (d.variable.empty() ? "" : "." + d.variable),
        impl->Rule()));
    impl->diagnostic_readings.emplace_back();
    impl->trackers.push_back(impl->diagnostic_trackers.back().get());
  }
  out->reset(new Monitor(std::move(impl)));
  return Status::Ok();
}

RowReport Monitor::Update(const std::string& period, const Eigen::Ref<const Eigen::VectorXd>& raw) {
  Impl& m = *impl_;
  RowReport report;
  report.period = period;
  Eigen::VectorXd y;
  bool ready = false;
  report.status = m.transformer.Apply(raw, &y, &ready);
  if (!report.status.ok() || !ready) return report;
  // No one-step prediction from the tracking and recent-window estimators: only the reference
  // samples' predictions feed monitors (their `last`).
  const UpdateResult u = m.tracking.Update(y, /*predict=*/false);
  if (!u.status.ok()) {  // cannot happen after the transformer's checks; kept for safety
    report.status = u.status;
    return report;
  }
  if (!u.estimated) {  // presample lags: the constancy estimators take them too (RunConstancy)
    m.ConstancyPresample(y);
    return report;
  }
  report.estimated = true;
  report.row = ++m.rows;
  report.readings.reserve(m.trackers.size());
  if (m.rows == 1) {  // the sequential monitors' samples start on the first estimated row
    m.Restart(&m.cusum->reference, 1);
    m.Restart(&m.volatility->reference, 1);
    for (const auto& ra : m.restriction_alarms) m.Restart(&ra->reference, 1);
  }
  m.references.Update(y);
  m.Estimate(&report);
  m.RunSequential(m.cusum.get(), &report);
  m.RunSequential(m.volatility.get(), &report);
  m.RunRestrictions(&report);
  m.RunConstancy(y, &report);
  m.RunDiagnostics(&report);
  return report;
}

const ModelSpec& Monitor::spec() const { return impl_->spec; }
std::int64_t Monitor::rows() const { return impl_->rows; }
const VarEstimator& Monitor::tracking() const { return impl_->tracking; }

std::vector<AlertEvent> Monitor::ActiveAlerts() const {
  std::vector<AlertEvent> out;
  for (const AlertTracker* t : impl_->trackers) {
    auto it = impl_->active.find(t->monitor());
    if (it != impl_->active.end()) out.push_back(it->second);
  }
  return out;
}

std::vector<std::string> Monitor::MonitorNames() const {
  std::vector<std::string> out;
  for (const AlertTracker* t : impl_->trackers) out.push_back(t->monitor());
  return out;
}

Status Monitor::Summary(FitReport* out, bool with_diagnostics) const {
  *out = FitReport();
  const auto& parts = impl_->robust_parts;
  // On a robust row the parts computed for it give the same summary, bit for bit.
  Status st = parts && parts->row == impl_->rows
                  ? SummarizeWith(impl_->tracking, parts->ctx, parts->spectrum, impl_->restrictions,
                                  out, with_diagnostics)
                  : SummarizeEstimate(impl_->tracking, impl_->spec.inference.covariance,
                                      impl_->restrictions, out, with_diagnostics);
  out->rows = impl_->rows;
  out->first_row = impl_->spec.var.lags;
  return st;
}

}  // namespace rimwatch
