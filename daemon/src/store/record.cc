// RecordRow and its payloads: what one Monitor row leaves in the store (record.h).
#include "rimwatch/daemon/record.h"

#include <cmath>

namespace rimwatch::daemon {
namespace {

using json = nlohmann::ordered_json;

// Non-finite numbers become null (nlohmann would do the same on dump; explicit here so the
// in-memory document, also published as an event, says the same as the stored text).
json Number(double v) { return std::isfinite(v) ? json(v) : json(nullptr); }
json Optional(const std::optional<double>& v) { return v ? Number(*v) : json(nullptr); }

json Rows(const Eigen::MatrixXd& m) {
  json out = json::array();
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    json row = json::array();
    for (Eigen::Index j = 0; j < m.cols(); ++j) row.push_back(Number(m(i, j)));
    out.push_back(std::move(row));
  }
  return out;
}

}  // namespace

json RowPayload(const RowReport& report) {
  json restrictions = json::object();
  for (const RestrictionRow& r : report.restrictions) {
    if (r.status.ok()) {
      restrictions[r.name] = json{{"statistic", Number(r.wald.statistic)},
                                  {"df", r.wald.df},
                                  {"p_value", Number(r.wald.p_value)}};
    } else {
      restrictions[r.name] = json{{"unavailable", r.status.ToString()}};
    }
  }
  json monitors = json::object();
  for (const MonitorSample& s : report.readings) {
    monitors[s.monitor] = json{{"armed", s.reading.armed},
                               {"statistic", Number(s.reading.statistic)},
                               {"warn", Number(s.reading.warn)},
                               {"critical", Number(s.reading.critical)}};
  }
  return json{{"row", report.row},
              {"period", report.period},
              {"estimate", report.estimate_status.ToString()},
              {"rho", report.has_spectral_radius ? Number(report.spectral_radius) : json(nullptr)},
              {"rho_se", Optional(report.rho_se)},
              {"rows_to_unit", Optional(report.rows_to_unit)},
              {"restrictions", std::move(restrictions)},
              {"monitors", std::move(monitors)}};
}

Status SnapshotPayload(const Monitor& monitor, json* out) {
  FitReport fit;
  Status st = monitor.Summary(&fit);
  if (!st.ok()) return st;
  json eigenvalues = json::array();
  for (const std::complex<double>& e : fit.eigenvalues) {
    eigenvalues.push_back(json::array({Number(e.real()), Number(e.imag())}));
  }
  json regressors = json::array();
  for (int j = 0; j < fit.spec.k(); ++j) regressors.push_back(fit.spec.RegressorName(j));
  *out = json{{"coefficients", Rows(fit.phi)},
              {"se", Rows(fit.std_error)},
              {"sigma", Rows(fit.sigma)},
              {"eigenvalues", std::move(eigenvalues)},
              {"rho", Number(fit.spectral_radius)},
              {"rho_se",
               fit.spectral_radius_se_status.ok() ? Number(fit.spectral_radius_se) : json(nullptr)},
              {"regressors", std::move(regressors)},
              {"variables", fit.spec.variables}};
  return Status::Ok();
}

Status RecordRow(Store& store, std::int64_t model_id, const Monitor& monitor,
                 const RowReport& report, const RecordOptions& options,
                 const std::string& recorded_at, const nlohmann::ordered_json* payload) {
  if (options.tests_every < 1) {
    return Status::InvalidArgument("record: tests_every = " + std::to_string(options.tests_every) +
                                   ": must be >= 1");
  }
  if (options.snapshot_every < 0) {
    return Status::InvalidArgument(
        "record: snapshot_every = " + std::to_string(options.snapshot_every) +
        ": must be >= 1, or 0 for never");
  }
  if (!store.in_transaction()) {
    return Status::InvalidArgument("record: RecordRow outside a transaction (call Begin first)");
  }
  if (!report.status.ok()) return Status::Ok();  // a refused row changed nothing
  if (report.estimated) {
    if (report.row % options.tests_every == 0 || !report.events.empty()) {
      TestRecord t;
      t.model_id = model_id;
      t.row = report.row;
      t.period = report.period;
      if (report.has_spectral_radius) t.rho = report.spectral_radius;
      t.rho_se = report.rho_se;
      t.payload_json = payload ? payload->dump() : RowPayload(report).dump();
      Status st = store.PutTest(t);
      if (!st.ok()) return st;
    }
    if (options.snapshot_every > 0 && report.row % options.snapshot_every == 0) {
      json snapshot;
      // A window that cannot be summarised (rank deficient, too few rows) has no snapshot; the
      // row's tests record says why ("estimate").
      if (SnapshotPayload(monitor, &snapshot).ok()) {
        Status st =
            store.PutSnapshot(SnapshotRecord{model_id, report.row, report.period, snapshot.dump()});
        if (!st.ok()) return st;
      }
    }
  }
  if (!options.alerts) return Status::Ok();
  for (const AlertEvent& ev : report.events) {
    Status st = store.PutAlert(model_id, ev, recorded_at);
    if (!st.ok()) return st;
  }
  return Status::Ok();
}

}  // namespace rimwatch::daemon
