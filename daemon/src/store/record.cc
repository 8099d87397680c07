// RecordRow and its payloads: what one Monitor row leaves in the store (record.h).
#include "rimwatch/daemon/record.h"

#include <charconv>
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

// Appends JSON text directly (no document tree): the per-row payload is written on every row, and
// building an nlohmann tree, then dumping it, cost more than the model update itself.
class TextWriter {
 public:
  explicit TextWriter(std::string* out) : out_(*out) {}
  void Raw(std::string_view s) { out_.append(s); }
  void Key(std::string_view k) {
    String(k);
    out_.push_back(':');
  }
  // Quoted and escaped as JSON requires (quote, backslash, control characters).
  // Runs of characters that need no escape are appended whole.
  void String(std::string_view s) {
    out_.push_back('"');
    std::size_t run = 0;  // start of the pending run of plain characters
    for (std::size_t i = 0; i < s.size(); ++i) {
      const char c = s[i];
      const auto u = static_cast<unsigned char>(c);
      if (c != '"' && c != '\\' && u >= 0x20) continue;
      out_.append(s.substr(run, i - run));
      run = i + 1;
      if (u < 0x20) {
        static constexpr char kHex[] = "0123456789abcdef";
        out_.append("\\u00");
        out_.push_back(kHex[u >> 4]);
        out_.push_back(kHex[u & 15]);
      } else {
        out_.push_back('\\');
        out_.push_back(c);
      }
    }
    out_.append(s.substr(run));
    out_.push_back('"');
  }
  // Shortest text that reads back to the same double (std::to_chars); a whole number keeps a
  // ".0" so readers see a floating-point value, as nlohmann's dump writes it. Non-finite: null.
  void Number(double v) {
    if (!std::isfinite(v)) {
      out_.append("null");
      return;
    }
    char buf[40];
    const auto r = std::to_chars(buf, buf + sizeof buf, v);
    const std::string_view text(buf, static_cast<std::size_t>(r.ptr - buf));
    out_.append(text);
    if (text.find_first_of(".e") == std::string_view::npos) out_.append(".0");
  }
  void Integer(std::int64_t v) {
    char buf[24];
    const auto r = std::to_chars(buf, buf + sizeof buf, v);
    out_.append(buf, static_cast<std::size_t>(r.ptr - buf));
  }
  void Optional(const std::optional<double>& v) {
    if (v) {
      Number(*v);
    } else {
      out_.append("null");
    }
  }
  void Bool(bool b) { out_.append(b ? "true" : "false"); }

 private:
  std::string& out_;
};

}  // namespace

void AppendRowPayloadText(const RowReport& report, const std::string* model, std::string* out,
                          PayloadReadings readings) {
  TextWriter w(out);
  w.Raw("{\"row\":");
  w.Integer(report.row);
  w.Raw(",\"period\":");
  w.String(report.period);
  w.Raw(",\"estimate\":");
  w.String(report.estimate_status.ToString());
  w.Raw(",\"rho\":");
  if (report.has_spectral_radius) {
    w.Number(report.spectral_radius);
  } else {
    w.Raw("null");
  }
  w.Raw(",\"rho_se\":");
  w.Optional(report.rho_se);
  w.Raw(",\"rows_to_unit\":");
  w.Optional(report.rows_to_unit);
  w.Raw(",\"restrictions\":{");
  bool first = true;
  for (const RestrictionRow& r : report.restrictions) {
    if (!first) w.Raw(",");
    first = false;
    w.Key(r.name);
    if (r.status.ok()) {
      w.Raw("{\"statistic\":");
      w.Number(r.wald.statistic);
      w.Raw(",\"df\":");
      w.Integer(r.wald.df);
      w.Raw(",\"p_value\":");
      w.Number(r.wald.p_value);
      w.Raw("}");
    } else {
      w.Raw("{\"unavailable\":");
      w.String(r.status.ToString());
      w.Raw("}");
    }
  }
  w.Raw("},\"monitors\":{");
  first = true;
  for (const MonitorSample& s : report.readings) {
    if (readings == PayloadReadings::kChanged && !s.changed) continue;
    if (!first) w.Raw(",");
    first = false;
    w.Key(s.monitor);
    w.Raw("{\"armed\":");
    w.Bool(s.reading.armed);
    w.Raw(",\"statistic\":");
    w.Number(s.reading.statistic);
    w.Raw(",\"warn\":");
    w.Number(s.reading.warn);
    w.Raw(",\"critical\":");
    w.Number(s.reading.critical);
    w.Raw("}");
  }
  w.Raw("}");
  if (model != nullptr) {
    w.Raw(",\"model\":");
    w.String(*model);
  }
  w.Raw("}");
}

std::string EventBody(const std::string& payload_text, const std::string& model) {
  std::string out;
  out.reserve(payload_text.size() + model.size() + 16);
  out.append(payload_text, 0, payload_text.empty() ? 0 : payload_text.size() - 1);  // drop '}'
  TextWriter w(&out);
  w.Raw(",\"model\":");
  w.String(model);
  w.Raw("}");
  return out;
}

std::string RowPayloadText(const RowReport& report, PayloadReadings readings) {
  std::string out;
  out.reserve(readings == PayloadReadings::kAll ? 2048 : 768);
  AppendRowPayloadText(report, nullptr, &out, readings);
  return out;
}

PayloadReadings RecordedReadings(const RowReport& report, const RecordOptions& options) {
  if (options.tests_every > 1 || report.row % options.full_readings_every == 0) {
    return PayloadReadings::kAll;
  }
  return PayloadReadings::kChanged;
}

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
    monitors[std::string(s.monitor)] = json{{"armed", s.reading.armed},
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
  Status st = monitor.Summary(&fit, /*with_diagnostics=*/false);
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

Status PrepareRecords(std::int64_t model_id, const Monitor& monitor, const RowReport& report,
                      const RecordOptions& options, RowRecords* out) {
  *out = RowRecords();
  if (options.tests_every < 1) {
    return Status::InvalidArgument("record: tests_every = " + std::to_string(options.tests_every) +
                                   ": must be >= 1");
  }
  if (options.full_readings_every < 1) {
    return Status::InvalidArgument("record: full_readings_every = " +
                                   std::to_string(options.full_readings_every) + ": must be >= 1");
  }
  if (options.snapshot_every < 0) {
    return Status::InvalidArgument(
        "record: snapshot_every = " + std::to_string(options.snapshot_every) +
        ": must be >= 1, or 0 for never");
  }
  if (!report.status.ok()) return Status::Ok();  // a refused row changed nothing
  if (report.estimated) {
    if (report.row % options.tests_every == 0 || !report.events.empty()) {
      TestRecord& t = out->test.emplace();
      t.model_id = model_id;
      t.row = report.row;
      t.period = report.period;
      if (report.has_spectral_radius) t.rho = report.spectral_radius;
      t.rho_se = report.rho_se;
      t.payload_json = RowPayloadText(report, RecordedReadings(report, options));
    }
    if (options.snapshot_every > 0 && report.row % options.snapshot_every == 0) {
      json snapshot;
      // A window that cannot be summarised (rank deficient, too few rows) has no snapshot; the
      // row's tests record says why ("estimate").
      if (SnapshotPayload(monitor, &snapshot).ok()) {
        out->snapshot = SnapshotRecord{model_id, report.row, report.period, snapshot.dump()};
      }
    }
  }
  if (options.alerts) out->alerts = report.events;
  return Status::Ok();
}

Status WriteRecords(Store& store, std::int64_t model_id, const RowRecords& records,
                    const std::string& recorded_at) {
  if (!store.in_transaction()) {
    return Status::InvalidArgument("record: RecordRow outside a transaction (call Begin first)");
  }
  if (records.test) {
    Status st = store.PutTest(*records.test);
    if (!st.ok()) return st;
  }
  if (records.snapshot) {
    Status st = store.PutSnapshot(*records.snapshot);
    if (!st.ok()) return st;
  }
  for (const AlertEvent& ev : records.alerts) {
    Status st = store.PutAlert(model_id, ev, recorded_at);
    if (!st.ok()) return st;
  }
  return Status::Ok();
}

Status RecordRow(Store& store, std::int64_t model_id, const Monitor& monitor,
                 const RowReport& report, const RecordOptions& options,
                 const std::string& recorded_at) {
  RowRecords records;
  Status st = PrepareRecords(model_id, monitor, report, options, &records);
  if (!st.ok()) return st;
  return WriteRecords(store, model_id, records, recorded_at);
}

}  // namespace rimwatch::daemon
