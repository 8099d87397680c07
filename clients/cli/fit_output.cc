#include "fit_output.h"

#include <algorithm>
#include <cmath>
#include <cstdarg>
#include <cstdint>
#include <cstdio>
#include <limits>
#include <ostream>
#include <string>

#include "rimwatch/daemon/fit_json.h"

namespace rimwatch::cli {
namespace {

using json = nlohmann::ordered_json;

using daemon::RegressorTerm;
using daemon::TermOfRegressor;

// The label of a data row in the JSON: its `period` text, or its 1-based row number.
json Period(const CsvTable& table, std::size_t row) {
  if (table.has_period) return table.periods[row];
  return static_cast<std::int64_t>(row + 1);
}

// ---- text

std::string Format(const char* fmt, ...) __attribute__((format(printf, 1, 2)));
std::string Format(const char* fmt, ...) {
  char buffer[512];
  va_list args;
  va_start(args, fmt);
  const int size = std::vsnprintf(buffer, sizeof buffer, fmt, args);
  va_end(args);
  return std::string(buffer, static_cast<std::size_t>(std::clamp(size, 0, 511)));
}

std::string PValue(double p) { return p >= 1e-4 ? Format("%.4f", p) : Format("%.2e", p); }

std::string RegressorLabel(const VarSpec& spec, int j) {
  const RegressorTerm term = TermOfRegressor(spec, j);
  if (term.var < 0) return term.kind;
  return spec.variables[term.var] + "[t-" + std::to_string(term.lag) + "]";
}

int LabelWidth(const VarSpec& spec) {
  std::size_t width = 9;  // "regressor"
  for (int j = 0; j < spec.k(); ++j) width = std::max(width, RegressorLabel(spec, j).size());
  return static_cast<int>(width);
}

void WriteHeader(const CsvTable& table, const FitOptions& options, const FitReport& report,
                 std::ostream& out) {
  const VarSpec& spec = report.spec;
  std::string names;
  for (const std::string& v : spec.variables) names += (names.empty() ? "" : ", ") + v;
  out << "VAR(" << spec.lags << ") fitted to " << table.path << "\n";
  out << "  variables      " << names << "\n";
  out << "  deterministic  " << DeterministicName(spec.deterministic) << "\n";
  out << "  sample         " << report.rows << " rows, period "
      << table.PeriodLabel(static_cast<std::size_t>(report.first_row)) << " to "
      << table.PeriodLabel(table.rows() - 1) << " (the " << spec.lags
      << " rows before it serve as lags)\n";
  out << "  regressors     " << spec.k() << " per equation, " << spec.n() * spec.k()
      << " in all; residual df " << report.rows - spec.k() << "\n";
  out << "  std. errors    " << CovarianceKindName(options.covariance.kind) << " on "
      << report.covariance_info.rows_used << " rows";
  if (options.covariance.kind == CovarianceKind::kHAC) {
    out << ", Bartlett lag " << report.covariance_info.hac_lags;
  }
  out << "\n";
}

void WriteEquation(const FitReport& report, int eq, std::ostream& out) {
  const VarSpec& spec = report.spec;
  const int w = LabelWidth(spec);
  out << "\nEquation for " << spec.variables[eq]
      << Format("   (residual s.d. %.6g)\n", std::sqrt(report.sigma(eq, eq)));
  out << Format("  %-*s %14s %14s %9s\n", w, "regressor", "estimate", "std. error", "t");
  for (int j = 0; j < spec.k(); ++j) {
    const double b = report.phi(eq, j);
    const double se = report.std_error(eq, j);
    const std::string t = se > 0.0 ? Format("%9.3f", b / se) : Format("%9s", "n/a");
    out << Format("  %-*s %14.6g %14.6g %s\n", w, RegressorLabel(spec, j).c_str(), b, se,
                  t.c_str());
  }
}

void WriteSigma(const FitReport& report, std::ostream& out) {
  const VarSpec& spec = report.spec;
  int w = 6;
  for (const std::string& v : spec.variables) w = std::max(w, static_cast<int>(v.size()));
  out << "\nResidual covariance (cross-product / (T - k) = / " << report.rows - spec.k() << ")\n";
  out << Format("  %-*s", w, "");
  for (const std::string& v : spec.variables) out << Format(" %14s", v.c_str());
  out << "\n";
  for (int i = 0; i < spec.n(); ++i) {
    out << Format("  %-*s", w, spec.variables[i].c_str());
    for (int j = 0; j < spec.n(); ++j) out << Format(" %14.6g", report.sigma(i, j));
    out << "\n";
  }
}

void WriteStability(const FitOptions& options, const FitReport& report, std::ostream& out) {
  out << "\nCompanion eigenvalues (largest modulus first)\n";
  out << Format("  %4s %12s %12s %12s\n", "#", "real", "imaginary", "modulus");
  for (std::size_t i = 0; i < report.eigenvalues.size(); ++i) {
    const std::complex<double> z = report.eigenvalues[i];
    out << Format("  %4zu %12.6f %12.6f %12.6f\n", i + 1, z.real(), z.imag(), std::abs(z));
  }
  const double rho = report.spectral_radius;
  out << Format("  spectral radius %.6f", rho);
  if (report.spectral_radius_se_status.ok()) {
    out << Format(", std. error %.6f (delta method, %s)", report.spectral_radius_se,
                  CovarianceKindName(options.covariance.kind));
  } else {
    out << ", std. error unavailable: " << report.spectral_radius_se_status.message();
  }
  out << (rho < 1.0 ? "\n  every eigenvalue lies inside the unit circle: the estimate is stable\n"
                    : "\n  an eigenvalue lies on or outside the unit circle: the estimate is "
                      "not stable\n");
}

void WriteTests(const FitOptions& options, const FitReport& report, std::ostream& out) {
  if (report.tests.empty()) return;
  std::size_t w = 10;  // "hypothesis"
  for (const NamedWaldResult& t : report.tests) w = std::max(w, t.name.size());
  const int iw = static_cast<int>(w);
  out << "\nWald tests (" << CovarianceKindName(options.covariance.kind)
      << " covariance; chi-squared form, then F form W/q against F(q, T - k))\n";
  out << Format("  %-*s %12s %4s %10s   %10s %4s %6s %10s\n", iw, "hypothesis", "W", "q", "p-value",
                "F", "df1", "df2", "p-value");
  for (const NamedWaldResult& t : report.tests) {
    if (!t.status.ok()) {
      out << Format("  %-*s unavailable: %s\n", iw, t.name.c_str(), t.status.ToString().c_str());
      continue;
    }
    const WaldResult& r = t.result;
    out << Format("  %-*s %12.4f %4d %10s   %10.4f %4d %6.0f %10s\n", iw, t.name.c_str(),
                  r.statistic, r.df, PValue(r.p_value).c_str(), r.f_statistic, r.f_df1, r.f_df2,
                  PValue(r.f_p_value).c_str());
  }
}

void WriteDiagnostics(const FitReport& report, std::ostream& out) {
  if (report.diagnostics.empty()) return;
  out << "\nResidual diagnostics (chi-squared statistics; small p-values point at "
         "misspecification)\n";
  out << Format("  %-18s %-10s %12s %6s %10s\n", "test", "equation", "statistic", "df", "p-value");
  for (const DiagnosticLine& d : report.diagnostics) {
    const char* eq = d.variable.empty() ? "(system)" : d.variable.c_str();
    if (!d.status.ok()) {
      out << Format("  %-18s %-10s unavailable: %s\n", d.name.c_str(), eq,
                    d.status.ToString().c_str());
      continue;
    }
    out << Format("  %-18s %-10s %12.4f %6.0f %10s\n", d.name.c_str(), eq, d.statistic, d.df,
                  PValue(d.p_value).c_str());
  }
}

// Index in report.criteria of the smallest value of `field` among the computed rows, or -1.
int ArgMin(const std::vector<LagCriteria>& rows, double LagCriteria::*field) {
  int best = -1;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    if (!rows[i].status.ok()) continue;
    if (best < 0 || rows[i].*field < rows[static_cast<std::size_t>(best)].*field) {
      best = static_cast<int>(i);
    }
  }
  return best;
}

void WriteCriteria(const FitOptions& options, const FitReport& report, std::ostream& out) {
  if (options.criteria_pmax < 0) return;
  const std::vector<LagCriteria>& rows = report.criteria;
  double LagCriteria::*const fields[] = {&LagCriteria::aic, &LagCriteria::hq, &LagCriteria::bic,
                                         &LagCriteria::fpe};
  int best[4];
  for (int c = 0; c < 4; ++c) best[c] = ArgMin(rows, fields[c]);
  out << "\nLag-order criteria (p = 0.." << options.criteria_pmax << " on the same "
      << static_cast<long>(report.rows + report.spec.lags) - options.criteria_pmax
      << " rows; * marks the minimum of each column)\n";
  out << Format("  %4s %15s %15s %15s %15s\n", "p", "AIC", "HQ", "BIC", "FPE");
  for (std::size_t i = 0; i < rows.size(); ++i) {
    std::string line = Format("  %4d", rows[i].lags);
    if (!rows[i].status.ok()) {
      out << line << "  unavailable: " << rows[i].status.ToString() << "\n";
      continue;
    }
    for (int c = 0; c < 4; ++c) {
      const char mark = best[c] == static_cast<int>(i) ? '*' : ' ';
      const char* fmt = c < 3 ? " %14.6f%c" : " %14.6g%c";
      line += Format(fmt, rows[i].*fields[c], mark);
    }
    out << line.substr(0, line.find_last_not_of(' ') + 1) << "\n";
  }
}

}  // namespace

json FitReportJson(const CsvTable& table, const FitOptions& options, const FitReport& report) {
  return daemon::FitReportJson(report, options,
                               Period(table, static_cast<std::size_t>(report.first_row)),
                               Period(table, table.rows() - 1));
}

void WriteFitText(const CsvTable& table, const FitOptions& options, const FitReport& report,
                  std::ostream& out) {
  WriteHeader(table, options, report, out);
  for (int eq = 0; eq < report.spec.n(); ++eq) WriteEquation(report, eq, out);
  WriteSigma(report, out);
  WriteStability(options, report, out);
  WriteTests(options, report, out);
  WriteDiagnostics(report, out);
  WriteCriteria(options, report, out);
  out << "\n" << kCaution << "\n";
}

}  // namespace rimwatch::cli
