#include "rimwatch/daemon/fit_json.h"

#include <complex>
#include <cstdint>
#include <string>
#include <utility>

namespace rimwatch::daemon {
namespace {

using json = nlohmann::ordered_json;

json MatrixJson(const Eigen::MatrixXd& m) {
  json rows = json::array();
  for (Eigen::Index i = 0; i < m.rows(); ++i) {
    json row = json::array();
    for (Eigen::Index j = 0; j < m.cols(); ++j) row.push_back(m(i, j));
    rows.push_back(std::move(row));
  }
  return rows;
}

json CoefficientsJson(const FitReport& report) {
  const VarSpec& spec = report.spec;
  json list = json::array();
  for (int eq = 0; eq < spec.n(); ++eq) {
    for (int j = 0; j < spec.k(); ++j) {
      const RegressorTerm term = TermOfRegressor(spec, j);
      const bool lag = term.var >= 0;
      list.push_back({{"equation", spec.variables[eq]},
                      {"term", term.kind},
                      {"variable", lag ? json(spec.variables[term.var]) : json(nullptr)},
                      {"lag", lag ? json(term.lag) : json(nullptr)},
                      {"estimate", report.phi(eq, j)},
                      {"std_error", report.std_error(eq, j)}});
    }
  }
  return list;
}

json EigenvaluesJson(const FitReport& report) {
  json list = json::array();
  for (const std::complex<double>& z : report.eigenvalues) {
    list.push_back({{"re", z.real()}, {"im", z.imag()}, {"modulus", std::abs(z)}});
  }
  return list;
}

json SpectralRadiusJson(const FitReport& report) {
  json out = {{"value", report.spectral_radius}};
  if (report.spectral_radius_se_status.ok()) {
    out["std_error"] = report.spectral_radius_se;
  } else {
    out["std_error"] = nullptr;
    out["std_error_unavailable"] = report.spectral_radius_se_status.message();
  }
  return out;
}

json CovarianceJson(const FitOptions& options, const FitReport& report) {
  json out = {{"kind", CovarianceKindName(options.covariance.kind)},
              {"rows_used", report.covariance_info.rows_used}};
  if (options.covariance.kind == CovarianceKind::kHAC) {
    out["hac_lags"] = report.covariance_info.hac_lags;
  }
  return out;
}

json TestsJson(const FitReport& report) {
  json list = json::array();
  for (const NamedWaldResult& t : report.tests) {
    json item = {{"name", t.name}};
    const WaldResult& r = t.result;
    const bool ok = t.status.ok();
    const auto value = [ok](auto x) { return ok ? json(x) : json(nullptr); };
    item["statistic"] = value(r.statistic);
    item["df"] = value(r.df);
    item["p_value"] = value(r.p_value);
    item["f_statistic"] = value(r.f_statistic);
    item["f_df1"] = value(r.f_df1);
    item["f_df2"] = value(r.f_df2);
    item["f_p_value"] = value(r.f_p_value);
    if (!ok) item["unavailable"] = t.status.ToString();
    list.push_back(std::move(item));
  }
  return list;
}

json DiagnosticsJson(const FitReport& report) {
  json list = json::array();
  for (const DiagnosticLine& d : report.diagnostics) {
    const bool ok = d.status.ok();
    json item = {{"name", d.name},
                 {"variable", d.variable.empty() ? json(nullptr) : json(d.variable)},
                 {"statistic", ok ? json(d.statistic) : json(nullptr)},
                 {"df", ok ? json(d.df) : json(nullptr)},
                 {"p_value", ok ? json(d.p_value) : json(nullptr)}};
    if (!ok) item["unavailable"] = d.status.ToString();
    list.push_back(std::move(item));
  }
  return list;
}

json CriteriaJson(const FitReport& report) {
  json out = json::object();
  for (const LagCriteria& c : report.criteria) {
    json row;
    if (c.status.ok()) {
      row = {{"aic", c.aic}, {"hq", c.hq}, {"bic", c.bic}, {"fpe", c.fpe}};
    } else {
      row = {{"aic", nullptr}, {"hq", nullptr}, {"bic", nullptr}, {"fpe", nullptr}};
      row["unavailable"] = c.status.ToString();
    }
    out[std::to_string(c.lags)] = std::move(row);
  }
  return out;
}

}  // namespace

RegressorTerm TermOfRegressor(const VarSpec& spec, int j) {
  const int d = spec.num_deterministic();
  if (j < d) return RegressorTerm{j == 0 ? "const" : "trend"};
  return RegressorTerm{"lag", (j - d) % spec.n(), (j - d) / spec.n() + 1};
}

json FitReportJson(const FitReport& report, const FitOptions& options, const json& first_period,
                   const json& last_period) {
  json doc;
  doc["sample"] = {
      {"rows", report.rows}, {"first_period", first_period}, {"last_period", last_period}};
  doc["lags"] = report.spec.lags;
  doc["deterministic"] = DeterministicName(report.spec.deterministic);
  doc["variables"] = report.spec.variables;
  doc["coefficients"] = CoefficientsJson(report);
  doc["sigma"] = MatrixJson(report.sigma);
  doc["sigma_ml"] = MatrixJson(report.sigma_ml);
  doc["eigenvalues"] = EigenvaluesJson(report);
  doc["spectral_radius"] = SpectralRadiusJson(report);
  doc["covariance"] = CovarianceJson(options, report);
  doc["tests"] = TestsJson(report);
  doc["diagnostics"] = DiagnosticsJson(report);
  if (options.criteria_pmax >= 0) doc["criteria"] = CriteriaJson(report);
  return doc;
}

}  // namespace rimwatch::daemon
