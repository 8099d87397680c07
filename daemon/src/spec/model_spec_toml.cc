#include "rimwatch/daemon/model_spec_toml.h"

#include <toml++/toml.h>
#include <map>
#include <set>
#include <sstream>

namespace rimwatch {
namespace {

// Collects the first error and the line of every key, so validation messages can point at it.
class Reader {
 public:
  explicit Reader(std::string source) : source_(std::move(source)) {}

  bool failed() const { return !error_.empty(); }
  Status Error() const { return Status::InvalidArgument(error_); }

  void Fail(const toml::source_region& where, const std::string& msg) {
    if (!failed()) error_ = source_ + ":" + std::to_string(where.begin.line) + ": " + msg;
  }
  void FailNoLine(const std::string& msg) {
    if (!failed()) error_ = source_ + ": " + msg;
  }
  void Remember(const std::string& key, const toml::node& node) {
    lines_.emplace(key, node.source().begin.line);
  }
  // "window.lambda = 1.5: ..." -> the line of window.lambda, if known.
  void FailValidation(const std::string& why) {
    std::size_t end = why.find_first_of(" :");
    std::string key = why.substr(0, end);
    auto it = lines_.find(key);
    if (it == lines_.end() && key.rfind("restriction", 0) == 0) it = lines_.find("restriction");
    if (it != lines_.end()) {
      error_ = source_ + ":" + std::to_string(it->second) + ": " + why;
    } else {
      error_ = source_ + ": " + why;
    }
  }

  // Refuse keys of `table` that are not in `allowed`.
  void OnlyKeys(const toml::table& table, const std::string& prefix,
                std::initializer_list<const char*> allowed) {
    std::set<std::string> ok(allowed.begin(), allowed.end());
    for (const auto& [key, node] : table) {
      const std::string name(key.str());
      if (!ok.count(name)) {
        std::string list;
        for (const char* a : allowed) list += (list.empty() ? "" : ", ") + std::string(a);
        Fail(node.source(), "unknown key '" + prefix + name + "' (allowed here: " + list + ")");
      }
    }
  }

  template <typename T>
  bool Get(const toml::table& table, const std::string& prefix, const char* key, T* out) {
    const toml::node* node = table.get(key);
    if (!node) return false;
    Remember(prefix + key, *node);
    if constexpr (std::is_same_v<T, double>) {
      if (auto v = node->value<double>()) {  // integers convert
        *out = *v;
        return true;
      }
      Fail(node->source(), "key '" + prefix + key + "' must be a number");
    } else if constexpr (std::is_same_v<T, std::string>) {
      if (auto v = node->value_exact<std::string>()) {
        *out = *v;
        return true;
      }
      Fail(node->source(), "key '" + prefix + key + "' must be a string");
    } else {
      if (auto v = node->value_exact<std::int64_t>()) {
        if (*v < std::numeric_limits<T>::min() || *v > std::numeric_limits<T>::max()) {
          Fail(node->source(),
               "key '" + prefix + key + "' = " + std::to_string(*v) + ": out of range");
          return false;
        }
        *out = static_cast<T>(*v);
        return true;
      }
      Fail(node->source(), "key '" + prefix + key + "' must be an integer");
    }
    return false;
  }

  const toml::table* Table(const toml::table& parent, const char* key) {
    const toml::node* node = parent.get(key);
    if (!node) return nullptr;
    Remember(key, *node);
    if (!node->is_table()) {
      Fail(node->source(), "key '" + std::string(key) + "' must be a table");
      return nullptr;
    }
    return node->as_table();
  }

  bool Strings(const toml::node& node, const std::string& key, std::vector<std::string>* out) {
    const toml::array* arr = node.as_array();
    if (!arr) {
      Fail(node.source(), "key '" + key + "' must be an array of strings");
      return false;
    }
    out->clear();
    for (const auto& item : *arr) {
      auto v = item.value_exact<std::string>();
      if (!v) {
        Fail(item.source(), "key '" + key + "' must be an array of strings");
        return false;
      }
      out->push_back(*v);
    }
    return true;
  }

 private:
  std::string source_;
  std::string error_;
  std::map<std::string, int> lines_;
};

void ReadWindow(Reader& rd, const toml::table& root, ModelSpec* m) {
  const toml::table* w = rd.Table(root, "window");
  if (!w) return;
  rd.OnlyKeys(*w, "window.", {"kind", "lambda", "rows"});
  std::string kind;
  if (rd.Get(*w, "window.", "kind", &kind) && !ParseWindowKind(kind, &m->var.window.kind)) {
    rd.Fail(w->get("kind")->source(),
            "window.kind = '" + kind + "': use expanding, sliding or forgetting");
  }
  rd.Get(*w, "window.", "lambda", &m->var.window.lambda);
  std::int64_t rows = static_cast<std::int64_t>(m->var.window.rows);
  if (rd.Get(*w, "window.", "rows", &rows)) {
    if (rows < 1) {
      rd.Fail(w->get("rows")->source(), "window.rows = " + std::to_string(rows) + ": must be >= 1");
    } else {
      m->var.window.rows = static_cast<std::size_t>(rows);
    }
  }
}

void ReadRestriction(Reader& rd, const toml::table& t, ModelSpec* m) {
  rd.OnlyKeys(t, "restriction.", {"name", "granger", "exclude_lag", "matrix"});
  RestrictionSpec r;
  if (!rd.Get(t, "restriction.", "name", &r.name)) {
    rd.Fail(t.source(), "every [[restriction]] needs a name");
    return;
  }
  int forms = 0;
  if (const toml::node* g = t.get("granger")) {
    ++forms;
    r.kind = RestrictionKind::kGranger;
    const toml::table* gt = g->as_table();
    if (!gt) {
      rd.Fail(g->source(), "restriction.granger must be a table {cause = [...], effect = [...]}");
      return;
    }
    rd.OnlyKeys(*gt, "restriction.granger.", {"cause", "effect"});
    const toml::node* cause = gt->get("cause");
    const toml::node* effect = gt->get("effect");
    if (!cause || !effect) {
      rd.Fail(g->source(), "restriction.granger needs both cause and effect");
      return;
    }
    rd.Strings(*cause, "restriction.granger.cause", &r.cause);
    rd.Strings(*effect, "restriction.granger.effect", &r.effect);
  }
  if (t.get("exclude_lag")) {
    ++forms;
    r.kind = RestrictionKind::kExcludeLag;
    rd.Get(t, "restriction.", "exclude_lag", &r.lag);
  }
  if (const toml::node* mx = t.get("matrix")) {
    ++forms;
    r.kind = RestrictionKind::kMatrix;
    const toml::table* mt = mx->as_table();
    const toml::array* rows = mt ? mt->get_as<toml::array>("R") : nullptr;
    const toml::array* rhs = mt ? mt->get_as<toml::array>("r") : nullptr;
    if (!rows || !rhs) {
      rd.Fail(mx->source(), "restriction.matrix must be {R = [[...], ...], r = [...]}");
      return;
    }
    rd.OnlyKeys(*mt, "restriction.matrix.", {"R", "r"});
    const std::size_t q = rows->size();
    std::size_t cols = 0;
    for (std::size_t i = 0; i < q; ++i) {
      const toml::array* row = (*rows)[i].as_array();
      if (!row || (i > 0 && row->size() != cols)) {
        rd.Fail(mx->source(), "restriction.matrix.R must be an array of equal-length arrays");
        return;
      }
      cols = row->size();
    }
    r.r_matrix.resize(static_cast<Eigen::Index>(q), static_cast<Eigen::Index>(cols));
    for (std::size_t i = 0; i < q; ++i) {
      const toml::array& row = *(*rows)[i].as_array();
      for (std::size_t j = 0; j < cols; ++j) {
        auto v = row[j].value<double>();
        if (!v) {
          rd.Fail(row[j].source(), "restriction.matrix.R entries must be numbers");
          return;
        }
        r.r_matrix(static_cast<Eigen::Index>(i), static_cast<Eigen::Index>(j)) = *v;
      }
    }
    r.r_value.resize(static_cast<Eigen::Index>(rhs->size()));
    for (std::size_t i = 0; i < rhs->size(); ++i) {
      auto v = (*rhs)[i].value<double>();
      if (!v) {
        rd.Fail((*rhs)[i].source(), "restriction.matrix.r entries must be numbers");
        return;
      }
      r.r_value[static_cast<Eigen::Index>(i)] = *v;
    }
  }
  if (forms != 1) {
    rd.Fail(t.source(),
            "restriction '" + r.name + "': give exactly one of granger, exclude_lag or matrix");
    return;
  }
  m->restrictions.push_back(std::move(r));
}

// [constancy] tests = ["nyblom_hansen", "reference_equality"], block_rows = 0 (automatic).
void ReadConstancy(Reader& rd, const toml::table& c, ModelSpec* m) {
  rd.OnlyKeys(c, "constancy.", {"tests", "block_rows"});
  if (const toml::node* t = c.get("tests")) {
    rd.Remember("constancy.tests", *t);
    std::vector<std::string> tests;
    if (!rd.Strings(*t, "constancy.tests", &tests)) return;
    m->constancy.nyblom_hansen = m->constancy.reference_equality = false;
    for (const std::string& name : tests) {
      bool* on = name == "nyblom_hansen"        ? &m->constancy.nyblom_hansen
                 : name == "reference_equality" ? &m->constancy.reference_equality
                                                : nullptr;
      if (!on) {
        rd.Fail(t->source(), "constancy.tests: unknown test '" + name +
                                 "' (use nyblom_hansen, reference_equality, or [] for none)");
        return;
      }
      if (*on) {
        rd.Fail(t->source(), "constancy.tests names '" + name + "' twice");
        return;
      }
      *on = true;
    }
  }
  rd.Get(c, "constancy.", "block_rows", &m->constancy.block_rows);
}

void ReadSections(Reader& rd, const toml::table& root, ModelSpec* m) {
  ReadWindow(rd, root, m);
  if (const toml::table* c = rd.Table(root, "covariance")) {
    rd.OnlyKeys(*c, "covariance.", {"kind", "every", "hac_lags"});
    std::string kind;
    if (rd.Get(*c, "covariance.", "kind", &kind) &&
        !ParseCovarianceKind(kind, &m->inference.covariance.kind)) {
      rd.Fail(c->get("kind")->source(),
              "covariance.kind = '" + kind + "': use classical, HC0, HC1, HC2, HC3 or HAC");
    }
    rd.Get(*c, "covariance.", "every", &m->inference.every);
    rd.Get(*c, "covariance.", "hac_lags", &m->inference.covariance.hac_lags);
  }
  if (const toml::table* t = rd.Table(root, "training")) {
    rd.OnlyKeys(*t, "training.", {"rows"});
    rd.Get(*t, "training.", "rows", &m->training_rows);
  }
  if (const toml::table* s = rd.Table(root, "stability")) {
    rd.OnlyKeys(*s, "stability.", {"warn", "critical", "slope_rows"});
    rd.Get(*s, "stability.", "warn", &m->stability.warn);
    rd.Get(*s, "stability.", "critical", &m->stability.critical);
    rd.Get(*s, "stability.", "slope_rows", &m->stability.slope_rows);
  }
  if (const toml::table* c = rd.Table(root, "constancy")) ReadConstancy(rd, *c, m);
  if (const toml::table* a = rd.Table(root, "alarms")) {
    rd.OnlyKeys(*a, "alarms.",
                {"false_alarm", "warn_false_alarm", "horizon", "hysteresis", "cooldown"});
    rd.Get(*a, "alarms.", "false_alarm", &m->alarms.false_alarm);
    rd.Get(*a, "alarms.", "warn_false_alarm", &m->alarms.warn_false_alarm);
    rd.Get(*a, "alarms.", "horizon", &m->alarms.horizon);
    rd.Get(*a, "alarms.", "hysteresis", &m->alarms.hysteresis);
    rd.Get(*a, "alarms.", "cooldown", &m->alarms.cooldown);
  }
  if (const toml::node* rs = root.get("restriction")) {
    rd.Remember("restriction", *rs);
    const toml::array* arr = rs->as_array();
    if (!arr || !arr->is_array_of_tables()) {
      rd.Fail(rs->source(), "restriction must be an array of tables ([[restriction]])");
      return;
    }
    for (const auto& item : *arr) ReadRestriction(rd, *item.as_table(), m);
  }
}

}  // namespace

Status ParseModelSpecToml(std::string_view text, std::string_view source, ModelSpec* out) {
  Reader rd{std::string(source)};
  toml::table root;
  try {
    // Debian's toml++ is built with exceptions: a syntax error throws, once, at this boundary.
    root = toml::parse(text, source);
  } catch (const toml::parse_error& err) {
    std::ostringstream msg;
    msg << source << ":" << err.source().begin.line << ": " << err.description();
    return Status::InvalidArgument(msg.str());
  }
  rd.OnlyKeys(root, "",
              {"name", "variables", "lags", "deterministic", "transform", "window", "covariance",
               "training", "stability", "restriction", "constancy", "alarms"});
  ModelSpec m;
  if (!rd.Get(root, "", "name", &m.name) && !rd.failed()) rd.FailNoLine("key 'name' is required");
  if (const toml::node* v = root.get("variables")) {
    rd.Remember("variables", *v);
    rd.Strings(*v, "variables", &m.var.variables);
  } else if (!rd.failed()) {
    rd.FailNoLine("key 'variables' is required (an array of series names)");
  }
  if (!rd.Get(root, "", "lags", &m.var.lags) && !rd.failed()) {
    rd.FailNoLine("key 'lags' is required");
  }
  std::string det;
  if (rd.Get(root, "", "deterministic", &det) && !ParseDeterministic(det, &m.var.deterministic)) {
    rd.Fail(root.get("deterministic")->source(),
            "deterministic = '" + det + "': use none, constant or trend");
  }
  m.transforms.assign(m.var.variables.size(), Transform::kLevel);
  if (const toml::node* tn = root.get("transform")) {
    rd.Remember("transform", *tn);
    const toml::table* tt = tn->as_table();
    if (!tt) {
      rd.Fail(tn->source(), "transform must be a table {variable = \"level|diff|logdiff\"}");
    } else {
      for (const auto& [key, node] : *tt) {
        const std::string var(key.str());
        const int idx = m.var.VariableIndex(var);
        auto value = node.value_exact<std::string>();
        if (idx < 0) {
          rd.Fail(node.source(), "transform names unknown variable '" + var + "'");
        } else if (!value ||
                   !ParseTransform(*value, &m.transforms[static_cast<std::size_t>(idx)])) {
          rd.Fail(node.source(), "transform." + var + ": use \"level\", \"diff\" or \"logdiff\"");
        }
      }
    }
  }
  ReadSections(rd, root, &m);
  if (rd.failed()) return rd.Error();
  std::string why;
  if (!m.IsValid(&why)) {
    rd.FailValidation(why);
    return rd.Error();
  }
  *out = std::move(m);
  return Status::Ok();
}

}  // namespace rimwatch
