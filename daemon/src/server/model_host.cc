#include "rimwatch/daemon/model_host.h"

#include <algorithm>
#include <cstring>
#include <map>
#include <utility>

namespace rimwatch::daemon {
namespace {

// splitmix64 finaliser: a well-mixed 64-bit step (common practice).
std::uint64_t Mix(std::uint64_t h, std::uint64_t v) {
  h ^= v + 0x9e3779b97f4a7c15ULL + (h << 6) + (h >> 2);
  h ^= h >> 30;
  h *= 0xbf58476d1ce4e5b9ULL;
  h ^= h >> 27;
  h *= 0x94d049bb133111ebULL;
  h ^= h >> 31;
  return h;
}

}  // namespace

Status ModelHost::Create(std::int64_t model_id, std::string spec_text, const ModelSpec& spec,
                         std::vector<std::int64_t> series_ids, std::unique_ptr<ModelHost>* out) {
  if (series_ids.size() != spec.var.variables.size()) {
    return Status::InvalidArgument("model " + spec.name + ": " +
                                   std::to_string(spec.var.variables.size()) + " variables but " +
                                   std::to_string(series_ids.size()) + " series ids");
  }
  std::unique_ptr<Monitor> monitor;
  Status st = Monitor::Create(spec, &monitor);
  if (!st.ok()) return st;
  std::unique_ptr<ModelHost> host(new ModelHost());
  host->model_id_ = model_id;
  host->spec_text_ = std::move(spec_text);
  host->spec_ = spec;
  host->series_ids_ = std::move(series_ids);
  host->monitor_ = std::move(monitor);
  *out = std::move(host);
  return Status::Ok();
}

std::uint64_t ModelHost::Fingerprint(std::int64_t key, const Eigen::VectorXd& raw) {
  std::uint64_t h = Mix(0x5a17ULL, static_cast<std::uint64_t>(key));
  for (Eigen::Index i = 0; i < raw.size(); ++i) {
    std::uint64_t bits = 0;
    const double v = raw[i];
    std::memcpy(&bits, &v, sizeof bits);
    h = Mix(h, bits);
  }
  return h;
}

void ModelHost::Admit(const InputRow& row) {
  fingerprints_.push_back(Fingerprint(row.key, row.raw));
  last_key_ = row.key;
  last_text_ = row.text;
}

void ModelHost::Run(const InputRow& row, RowOutcome* out) {
  RowReport report = monitor_->Update(row.text, row.raw);
  if (!report.status.ok()) {
    out->refused.push_back("period " + row.text + ": " + report.status.message());
    return;
  }
  if (report.estimated) {
    row_keys_.push_back(row.key);
    last_report_ = report;
    out->reports.push_back(std::move(report));
  }
}

void ModelHost::Offer(int var, const Period& period, double value, PutOutcome outcome,
                      std::vector<InputRow>* ready) {
  if (outcome == PutOutcome::kDuplicate) return;
  if (needs_rebuild_) return;  // the rebuild reads everything from the store
  if (last_key_ && period.key <= *last_key_) {
    needs_rebuild_ = true;
    return;
  }
  const int n = static_cast<int>(series_ids_.size());
  Pending& p = pending_[period.key];
  if (p.values.empty()) {
    p.values.assign(n, std::nullopt);
    p.text = period.text;
  }
  if (!p.values[var]) ++p.filled;
  p.values[var] = value;
  if (p.filled < n) return;
  // Complete: admit it; older incomplete periods can no longer become rows without changing
  // history.
  InputRow row{period.key, p.text, Eigen::VectorXd(n)};
  for (int j = 0; j < n; ++j) row.raw[j] = *p.values[j];
  pending_.erase(pending_.begin(), std::next(pending_.find(row.key)));
  Admit(row);
  ready->push_back(std::move(row));
}

Status ModelHost::Rebuild(Store& store, const RebuildOptions& options,
                          std::vector<AlertEvent>* alert_changes, RowOutcome* out) {
  const int n = static_cast<int>(series_ids_.size());
  // Latest vintages of every series, joined on the period key.
  std::map<std::int64_t, Pending> all;
  for (int j = 0; j < n; ++j) {
    if (series_ids_[j] == 0) continue;  // the series has no observation yet
    std::vector<StoredValue> values;
    Status st = store.LoadSeries(series_ids_[j], &values);
    if (!st.ok()) return st;
    for (const StoredValue& v : values) {
      Pending& p = all[v.period_key];
      if (p.values.empty()) {
        p.values.assign(n, std::nullopt);
        p.text = v.period_text;
      }
      if (!p.values[j]) ++p.filled;
      p.values[j] = v.value;
    }
  }
  std::unique_ptr<Monitor> fresh;
  Status st = Monitor::Create(spec_, &fresh);
  if (!st.ok()) return st;

  const std::vector<AlertEvent> before = monitor_->ActiveAlerts();
  const std::vector<std::uint64_t> old_prints = std::move(fingerprints_);
  fingerprints_.clear();
  monitor_ = std::move(fresh);
  last_key_.reset();
  last_text_.clear();
  last_report_.reset();
  row_keys_.clear();
  pending_.clear();
  needs_rebuild_ = false;

  // Rows whose input is unchanged give identical reports (the Monitor is deterministic), so
  // their records already in the store stay; from the first changed row on they are re-recorded.
  bool changed = false;
  std::int64_t changed_after_row = 0;
  RowOutcome scratch;
  std::optional<std::int64_t> last_complete;
  for (const auto& [key, p] : all) {
    if (p.filled == n) last_complete = key;
  }
  const bool tail_mode = options.record_from_input.has_value();
  std::vector<AlertEvent> tail_events;
  for (auto& [key, p] : all) {
    if (last_complete && key <= *last_complete) {
      if (p.filled < n) continue;
      InputRow row{key, p.text, Eigen::VectorXd(n)};
      for (int j = 0; j < n; ++j) row.raw[j] = *p.values[j];
      const std::size_t index = fingerprints_.size();
      if (tail_mode) {
        // Restart: inputs before the cursor have their records; the rest are recorded now, with
        // their alerts, as they would have been had the daemon not stopped.
        const bool record =
            options.record && static_cast<std::int64_t>(index) >= *options.record_from_input;
        if (record && !changed) {
          changed = true;
          st = store.DeleteRecordsAfter(model_id_, monitor_->rows());  // none expected; be sure
          if (!st.ok()) return st;
        }
        const std::size_t first_new = out->reports.size();
        Admit(row);
        Run(row, out);
        if (record) {
          for (std::size_t i = first_new; i < out->reports.size(); ++i) {
            st = RecordRow(store, model_id_, *monitor_, out->reports[i], options.record_options,
                           options.recorded_at);
            if (!st.ok()) return st;
            for (const AlertEvent& e : out->reports[i].events) tail_events.push_back(e);
          }
        } else {
          out->reports.resize(first_new);
        }
        continue;
      }
      const std::uint64_t print = Fingerprint(key, row.raw);
      if (!changed && (index >= old_prints.size() || old_prints[index] != print)) {
        changed = true;
        changed_after_row = monitor_->rows();
        if (options.record) {
          st = store.DeleteRecordsAfter(model_id_, changed_after_row);
          if (!st.ok()) return st;
        }
      }
      RowOutcome* sink = changed ? out : &scratch;
      const std::size_t first_new = sink->reports.size();
      Admit(row);
      Run(row, sink);
      if (changed && options.record) {
        RecordOptions ro = options.record_options;
        ro.alerts = false;
        for (std::size_t i = first_new; i < sink->reports.size(); ++i) {
          st = RecordRow(store, model_id_, *monitor_, sink->reports[i], ro, options.recorded_at);
          if (!st.ok()) return st;
        }
      }
      scratch.reports.clear();
    } else {
      pending_.emplace(key, std::move(p));
    }
  }
  if (tail_mode) {
    for (RowReport& r : out->reports) r.events.clear();
    for (AlertEvent& e : tail_events) {
      e.model = spec_.name;
      alert_changes->push_back(std::move(e));
    }
    return Status::Ok();
  }
  if (!changed && fingerprints_.size() < old_prints.size()) {
    // History got shorter (cannot happen with append-only vintages, but stay truthful).
    changed_after_row = monitor_->rows();
    if (options.record) {
      st = store.DeleteRecordsAfter(model_id_, changed_after_row);
      if (!st.ok()) return st;
    }
  }
  // Reports of the rebuilt rows carry the new run's own events; they describe a history that was
  // never published as such. What is published is the change of the active set.
  for (RowReport& r : out->reports) r.events.clear();
  std::vector<AlertEvent> changes =
      AlertChanges(before, monitor_->ActiveAlerts(), monitor_->rows(), last_text_, options.reason);
  for (AlertEvent& ev : changes) {
    ev.model = spec_.name;
    if (options.record) {
      st = store.PutAlert(model_id_, ev, options.recorded_at);
      if (!st.ok()) return st;
    }
    alert_changes->push_back(std::move(ev));
  }
  return Status::Ok();
}

std::string ModelHost::RowPeriod(std::int64_t row) const {
  if (row < 1 || row > static_cast<std::int64_t>(row_keys_.size())) return std::string();
  Period last;
  if (!ParsePeriod(last_text_, &last).ok()) return std::string();
  return FormatPeriod(last.kind, row_keys_[static_cast<std::size_t>(row - 1)]);
}

std::vector<AlertEvent> AlertChanges(const std::vector<AlertEvent>& before,
                                     const std::vector<AlertEvent>& after, std::int64_t row,
                                     const std::string& period, const std::string& reason) {
  std::map<std::string, const AlertEvent*> b, a;
  for (const AlertEvent& e : before) b[e.monitor] = &e;
  for (const AlertEvent& e : after) a[e.monitor] = &e;
  const std::string prefix = reason.empty() ? std::string() : reason + ": ";
  std::vector<AlertEvent> out;
  for (const AlertEvent& e : before) {
    auto it = a.find(e.monitor);
    if (it != a.end() && it->second->level == e.level) continue;
    if (it != a.end()) continue;  // level changed: reported as a raise below
    AlertEvent c = e;
    c.raised = false;
    c.row = row;
    c.period = period;
    c.message = prefix + "the " + e.monitor + " alert no longer holds on the revised history.";
    out.push_back(std::move(c));
  }
  for (const AlertEvent& e : after) {
    auto it = b.find(e.monitor);
    if (it != b.end() && it->second->level == e.level) continue;
    AlertEvent r = e;
    r.raised = true;
    r.row = row;
    r.period = period;
    r.message = prefix + e.message;
    out.push_back(std::move(r));
  }
  return out;
}

std::vector<AlertEvent> ActiveFromLog(const std::vector<AlertEvent>& log) {
  std::map<std::string, AlertEvent> last;
  std::vector<std::string> order;
  for (const AlertEvent& e : log) {
    if (!last.count(e.monitor)) order.push_back(e.monitor);
    last[e.monitor] = e;
  }
  std::vector<AlertEvent> out;
  for (const std::string& m : order) {
    if (last[m].raised) out.push_back(last[m]);
  }
  return out;
}

}  // namespace rimwatch::daemon
