// Reading a rimwatch log for `rimwatch report` (report_history.h).
#include "report_history.h"

#include <sqlite3.h>
#include <sys/stat.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <nlohmann/json.hpp>

#include "rimwatch/daemon/model_spec_toml.h"
#include "rimwatch/daemon/store.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::json;
constexpr double kNaN = std::numeric_limits<double>::quiet_NaN();

double Num(const json& j) { return j.is_number() ? j.get<double>() : kNaN; }

std::string Text(sqlite3_stmt* s, int i) {
  const unsigned char* p = sqlite3_column_text(s, i);
  return p == nullptr ? std::string()
                      : std::string(reinterpret_cast<const char*>(p),
                                    static_cast<std::size_t>(sqlite3_column_bytes(s, i)));
}
double Real(sqlite3_stmt* s, int i) {
  return sqlite3_column_type(s, i) == SQLITE_NULL ? kNaN : sqlite3_column_double(s, i);
}

// A prepared statement finalised on every path.
class Query {
 public:
  Query(sqlite3* db, const char* sql) { rc_ = sqlite3_prepare_v2(db, sql, -1, &s_, nullptr); }
  ~Query() { sqlite3_finalize(s_); }
  Query(const Query&) = delete;
  Query& operator=(const Query&) = delete;
  bool ok() const { return rc_ == SQLITE_OK; }
  sqlite3_stmt* get() const { return s_; }

 private:
  sqlite3_stmt* s_ = nullptr;
  int rc_ = SQLITE_ERROR;
};

Status SqliteError(sqlite3* db, const std::string& what) {
  return Status::IoError("report: " + what + ": " + sqlite3_errmsg(db));
}

void GrowMonitor(MonitorTrack* t, std::size_t n) {
  t->statistic.resize(n, kNaN);
  t->warn.resize(n, kNaN);
  t->critical.resize(n, kNaN);
  t->armed.resize(n, 0);
}
// Row i of t repeats row i - 1. REQUIRES: t holds rows 0..i-1 (i >= 1: a track exists only
// from the row that first carried it).
void CarryMonitor(MonitorTrack* t, std::size_t i) {
  t->statistic.push_back(t->statistic[i - 1]);
  t->warn.push_back(t->warn[i - 1]);
  t->critical.push_back(t->critical[i - 1]);
  t->armed.push_back(t->armed[i - 1]);
}
void GrowRestriction(RestrictionTrack* t, std::size_t n) {
  t->statistic.resize(n, kNaN);
  t->p_value.resize(n, kNaN);
}

std::vector<std::vector<double>> Matrix(const json& j) {
  std::vector<std::vector<double>> out;
  if (!j.is_array()) return out;
  for (const json& row : j) {
    std::vector<double> r;
    if (row.is_array()) {
      for (const json& v : row) r.push_back(Num(v));
    }
    out.push_back(std::move(r));
  }
  return out;
}

std::vector<std::string> Strings(const json& j) {
  std::vector<std::string> out;
  if (!j.is_array()) return out;
  for (const json& v : j) out.push_back(v.is_string() ? v.get<std::string>() : std::string());
  return out;
}

}  // namespace

const std::string& ModelHistory::PeriodNear(double row, std::size_t* index) const {
  static const std::string kNone;
  if (rows.empty()) return kNone;
  auto it = std::lower_bound(rows.begin(), rows.end(), static_cast<std::int64_t>(std::ceil(row)));
  std::size_t i = static_cast<std::size_t>(it - rows.begin());
  if (i == rows.size()) {
    i = rows.size() - 1;
  } else if (i > 0 && row - static_cast<double>(rows[i - 1]) < static_cast<double>(rows[i]) - row) {
    --i;
  }
  if (index != nullptr) *index = i;
  return periods[i];
}

HistoryReader::~HistoryReader() {
  if (db_ != nullptr) sqlite3_close(db_);
}

Status HistoryReader::Open(const std::string& path, std::unique_ptr<HistoryReader>* out) {
  struct stat info;
  if (stat(path.c_str(), &info) != 0) {
    return Status::InvalidArgument(path +
                                   ": no such file (give the log written by rimwatchd or "
                                   "by `rimwatch replay --db`)");
  }
  if (S_ISDIR(info.st_mode)) {
    return Status::InvalidArgument(path + " is a directory, not a rimwatch log");
  }
  std::unique_ptr<HistoryReader> reader(new HistoryReader());
  reader->path_ = path;
  daemon::StoreOptions options;
  options.path = path;
  options.read_only = true;
  Status st = daemon::Store::Open(options, &reader->store_);
  if (!st.ok()) {
    const std::string& m = st.message();
    if (m.find("not a database") != std::string::npos) {
      return Status::InvalidArgument(path + " is not a rimwatch log (not an SQLite database)");
    }
    return Status::InvalidArgument(path + " cannot be read as a rimwatch log: " + m);
  }
  reader->schema_version_ = reader->store_->schema_version();
  if (sqlite3_open_v2(path.c_str(), &reader->db_, SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX,
                      nullptr) != SQLITE_OK) {
    return SqliteError(reader->db_, "open " + path);
  }
  sqlite3_busy_timeout(reader->db_, 5000);
  *out = std::move(reader);
  return Status::Ok();
}

Status HistoryReader::Models(std::vector<LoggedModel>* out) {
  out->clear();
  Query q(db_, "SELECT id, name, spec_text, added_at, dropped_at FROM models ORDER BY id");
  if (!q.ok()) return SqliteError(db_, "read the models of " + path_);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    LoggedModel m;
    m.id = sqlite3_column_int64(q.get(), 0);
    m.name = Text(q.get(), 1);
    m.spec_text = Text(q.get(), 2);
    m.added_at = Text(q.get(), 3);
    if (sqlite3_column_type(q.get(), 4) != SQLITE_NULL) m.dropped_at = Text(q.get(), 4);
    out->push_back(std::move(m));
  }
  if (rc != SQLITE_DONE) return SqliteError(db_, "read the models of " + path_);
  return Status::Ok();
}

Status HistoryReader::Load(const LoggedModel& model, ModelHistory* out) {
  *out = ModelHistory();
  out->model = model;
  const Status parsed = ParseModelSpecToml(
      model.spec_text, "the stored spec of model '" + model.name + "'", &out->spec);
  out->spec_parsed = parsed.ok();
  if (!parsed.ok()) out->spec_error = parsed.message();
  Status st = LoadTests(out);
  if (st.ok()) st = LoadSnapshots(out);
  if (st.ok()) st = store_->LoadAlerts(model.id, &out->alerts);
  return st;
}

Status HistoryReader::LoadTests(ModelHistory* out) {
  Query q(db_,
          "SELECT row, period, rho, rho_se, payload FROM tests WHERE model_id = ?1 ORDER BY row");
  if (!q.ok()) return SqliteError(db_, "read the tests of model '" + out->model.name + "'");
  sqlite3_bind_int64(q.get(), 1, out->model.id);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    const std::int64_t row = sqlite3_column_int64(q.get(), 0);
    const std::size_t i = out->rows.size();
    out->rows.push_back(row);
    out->periods.push_back(Text(q.get(), 1));
    out->rho.push_back(Real(q.get(), 2));
    out->rho_se.push_back(Real(q.get(), 3));
    const json p = json::parse(Text(q.get(), 4), nullptr, /*allow_exceptions=*/false);
    if (!p.is_object()) {
      return Status::InvalidArgument("report: tests row " + std::to_string(row) + " of model '" +
                                     out->model.name + "': the payload is not a JSON object");
    }
    out->rows_to_unit.push_back(p.contains("rows_to_unit") ? Num(p["rows_to_unit"]) : kNaN);
    if (p.contains("estimate") && p["estimate"].is_string() && p["estimate"] != "ok") {
      ++out->rows_not_estimable;
      out->last_not_estimable = p["estimate"].get<std::string>();
    }
    // A monitor missing from a row's payload reads as on the previous row (the log keeps only
    // the readings that changed, daemon/record.h): carry every track forward, then overwrite.
    for (auto& [name, t] : out->monitors) CarryMonitor(&t, i);
    if (p.contains("monitors") && p["monitors"].is_object()) {
      for (const auto& [name, m] : p["monitors"].items()) {
        auto [it, fresh] = out->monitors.try_emplace(name);
        if (fresh) out->monitor_names.push_back(name);
        MonitorTrack& t = it->second;
        GrowMonitor(&t, i + 1);
        if (!m.is_object()) continue;
        t.statistic[i] = m.contains("statistic") ? Num(m["statistic"]) : kNaN;
        t.warn[i] = m.contains("warn") ? Num(m["warn"]) : kNaN;
        t.critical[i] = m.contains("critical") ? Num(m["critical"]) : kNaN;
        t.armed[i] = m.contains("armed") && m["armed"].is_boolean() && m["armed"].get<bool>();
      }
    }
    if (p.contains("restrictions") && p["restrictions"].is_object()) {
      for (const auto& [name, r] : p["restrictions"].items()) {
        auto [it, fresh] = out->restrictions.try_emplace(name);
        if (fresh) out->restriction_names.push_back(name);
        RestrictionTrack& t = it->second;
        GrowRestriction(&t, i + 1);
        if (!r.is_object()) continue;
        if (r.contains("unavailable")) {
          ++t.unavailable;
          t.last_unavailable = r["unavailable"].is_string() ? r["unavailable"].get<std::string>()
                                                            : std::string("unavailable");
          continue;
        }
        t.statistic[i] = r.contains("statistic") ? Num(r["statistic"]) : kNaN;
        t.p_value[i] = r.contains("p_value") ? Num(r["p_value"]) : kNaN;
        if (r.contains("df") && r["df"].is_number_integer()) t.df = r["df"].get<int>();
      }
    }
  }
  if (rc != SQLITE_DONE) {
    return SqliteError(db_, "read the tests of model '" + out->model.name + "'");
  }
  for (auto& [name, t] : out->monitors) GrowMonitor(&t, out->rows.size());
  for (auto& [name, t] : out->restrictions) GrowRestriction(&t, out->rows.size());
  return Status::Ok();
}

Status HistoryReader::LoadSnapshots(ModelHistory* out) {
  Query q(db_, "SELECT row, period, payload FROM snapshots WHERE model_id = ?1 ORDER BY row");
  if (!q.ok()) return SqliteError(db_, "read the snapshots of model '" + out->model.name + "'");
  sqlite3_bind_int64(q.get(), 1, out->model.id);
  int rc = 0;
  while ((rc = sqlite3_step(q.get())) == SQLITE_ROW) {
    Snapshot s;
    s.row = sqlite3_column_int64(q.get(), 0);
    s.period = Text(q.get(), 1);
    const json p = json::parse(Text(q.get(), 2), nullptr, /*allow_exceptions=*/false);
    if (!p.is_object()) {
      return Status::InvalidArgument("report: snapshot row " + std::to_string(s.row) +
                                     " of model '" + out->model.name +
                                     "': the payload is not a JSON object");
    }
    if (p.contains("coefficients")) s.coefficients = Matrix(p["coefficients"]);
    if (p.contains("se")) s.se = Matrix(p["se"]);
    if (p.contains("eigenvalues") && p["eigenvalues"].is_array()) {
      for (const json& e : p["eigenvalues"]) {
        if (e.is_array() && e.size() == 2) s.eigenvalues.emplace_back(Num(e[0]), Num(e[1]));
      }
    }
    s.rho = p.contains("rho") ? Num(p["rho"]) : kNaN;
    s.rho_se = p.contains("rho_se") ? Num(p["rho_se"]) : kNaN;
    if (p.contains("regressors")) s.regressors = Strings(p["regressors"]);
    if (p.contains("variables")) s.variables = Strings(p["variables"]);
    out->snapshots.push_back(std::move(s));
  }
  if (rc != SQLITE_DONE) {
    return SqliteError(db_, "read the snapshots of model '" + out->model.name + "'");
  }
  return Status::Ok();
}

}  // namespace rimwatch::cli
