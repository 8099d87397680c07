#include "fit_command.h"

#include <Eigen/Core>
#include <algorithm>
#include <iostream>
#include <memory>
#include <ostream>
#include <sstream>

#include "csv_table.h"
#include "fit_output.h"
#include "rimwatch/engine/var_fit.h"

namespace rimwatch::cli {
namespace {

constexpr const char* kFitDescription =
    "Estimate a VAR(p) on a CSV file by least squares and report its inference";

constexpr const char* kFitFooter =
    "\nFits y_t on every row of the file (the expanding window of the engine, i.e. OLS) and\n"
    "reports coefficients with standard errors, residual covariances, companion eigenvalues,\n"
    "the spectral radius with its delta-method standard error, Wald tests and lag-order\n"
    "criteria.\n"
    "\nCSV input:\n"
    "  A header line of variable names, then one line per period, oldest first; fields separated\n"
    "  by ','. An optional first column named 'period' labels the rows with any text (an integer\n"
    "  bar number, a date, a quarter label). Lines starting with '#' are comments; blank lines\n"
    "  are allowed at the end. Values must be finite decimal numbers. Quoted fields are not\n"
    "  supported.\n"
    "\n"
    "Model: y_t = c [+ b t] + A_1 y_{t-1} + ... + A_P y_{t-P} + e_t, estimated by OLS equation by\n"
    "equation; the first P rows serve as presample lags. --granger CAUSE:EFFECT tests that the\n"
    "variables in CAUSE (comma-separated) enter no equation of EFFECT at any lag, e.g.\n"
    "--granger b,c:a. --exclude-lag J tests that every lag-J coefficient is zero. Both repeat.\n"
    "--criteria PMAX fits p = 0..PMAX on a common sample (the first PMAX rows held out) and\n"
    "tabulates AIC, HQ, BIC and FPE.\n"
    "\n"
    "Example:\n"
    "  rimwatch fit --csv clients/examples/desk_minutes.csv --lags 2 \\\n"
    "      --granger beta:alpha --exclude-lag 2 --criteria 4\n"
    "  Add --json for one JSON document (schemas/fit.schema.json) instead of the report.\n"
    "\n";

// The engine's bound on the lag order (VarSpec::IsValid); checked here first so that no count
// below can overflow.
constexpr int kMaxLags = 1000;

struct Problem {
  int code = kExitOk;
  std::string message;
  bool ok() const { return code == kExitOk; }
};

Problem BadInput(std::string message) { return {kExitBadInput, std::move(message)}; }
Problem BadOption(const std::string& message) { return BadInput("rimwatch fit: " + message); }
Problem BadAgainstFile(const CsvTable& table, int line, std::string what) {
  return BadInput(CsvError{table.path, line, std::move(what)}.ToString());
}

std::string JoinNames(const std::vector<std::string>& names) {
  std::string out;
  for (const std::string& name : names) out += (out.empty() ? "" : ", ") + name;
  return out;
}

// Options that do not depend on the data.
Problem ParseModelOptions(const FitCommandOptions& in, FitOptions* out) {
  if (in.lags < 1 || in.lags > kMaxLags) {
    return BadOption("--lags " + std::to_string(in.lags) + ": must lie in 1.." +
                     std::to_string(kMaxLags));
  }
  out->lags = in.lags;
  if (!ParseDeterministic(in.deterministic, &out->deterministic)) {
    return BadOption("--deterministic " + in.deterministic + ": use none, constant or trend");
  }
  if (!ParseCovarianceKind(in.covariance, &out->covariance.kind)) {
    return BadOption("--covariance " + in.covariance +
                     ": use classical, HC0, HC1, HC2, HC3 or HAC");
  }
  if (in.hac_lags_given && out->covariance.kind != CovarianceKind::kHAC) {
    return BadOption("--hac-lags applies only with --covariance HAC");
  }
  if (in.hac_lags < -1) {
    return BadOption("--hac-lags " + std::to_string(in.hac_lags) +
                     ": must be >= 0 (or -1 for the rule of thumb)");
  }
  out->covariance.hac_lags = in.hac_lags;
  if (in.criteria_pmax < -1) {
    return BadOption("--criteria " + std::to_string(in.criteria_pmax) + ": must be >= 0");
  }
  out->criteria_pmax = in.criteria_pmax;
  out->exclude_lags = in.exclude_lags;
  return {};
}

// One comma-separated group of variable names, each in the header and listed once.
Problem ParseGroup(const std::string& spec, const std::string& group_text, const CsvTable& table,
                   std::vector<std::string>* out) {
  std::stringstream in(group_text);
  std::string name;
  while (std::getline(in, name, ',')) {
    name.erase(0, name.find_first_not_of(" \t"));
    name.erase(name.find_last_not_of(" \t") + 1);
    if (name.empty()) return BadOption("--granger " + spec + ": empty variable name");
    if (std::find(table.names.begin(), table.names.end(), name) == table.names.end()) {
      return BadAgainstFile(table, table.header_line,
                            "--granger " + spec + ": no variable '" + name +
                                "' in the header (variables: " + JoinNames(table.names) + ")");
    }
    if (std::find(out->begin(), out->end(), name) != out->end()) {
      return BadOption("--granger " + spec + ": '" + name + "' is listed twice");
    }
    out->push_back(name);
  }
  if (out->empty()) return BadOption("--granger " + spec + ": empty group; write CAUSE:EFFECT");
  return {};
}

Problem ParseGranger(const std::string& spec, const CsvTable& table, GrangerRequest* out) {
  const std::size_t colon = spec.find(':');
  if (colon == std::string::npos || spec.find(':', colon + 1) != std::string::npos) {
    return BadOption("--granger " + spec + ": write CAUSE:EFFECT with exactly one ':'");
  }
  Problem p = ParseGroup(spec, spec.substr(0, colon), table, &out->cause);
  if (p.ok()) p = ParseGroup(spec, spec.substr(colon + 1), table, &out->effect);
  if (!p.ok()) return p;
  for (const std::string& name : out->cause) {
    if (std::find(out->effect.begin(), out->effect.end(), name) != out->effect.end()) {
      return BadOption("--granger " + spec + ": '" + name + "' is both a cause and an effect");
    }
  }
  return {};
}

// Checks that need the data: lag numbers, enough rows for the lag order and the criteria.
Problem CheckAgainstData(const FitOptions& fit, const CsvTable& table) {
  const long rows = static_cast<long>(table.rows());
  const long n = static_cast<long>(table.cols());
  VarSpec shape;
  shape.variables = table.names;
  shape.lags = fit.lags;
  shape.deterministic = fit.deterministic;
  const long d = shape.num_deterministic();
  for (int j : fit.exclude_lags) {
    if (j < 1 || j > fit.lags) {
      return BadOption("--exclude-lag " + std::to_string(j) + ": must lie in 1.." +
                       std::to_string(fit.lags) + " (the lag order)");
    }
  }
  // OLS needs more estimation rows (rows - p) than regressors per equation (k = d + n p), so that
  // the df-adjusted covariance / (T - k) exists (common practice).
  const long k = shape.k();
  if (rows - fit.lags <= k) {
    return BadAgainstFile(table, table.lines.back(),
                          std::to_string(rows) + " observations are too few for lag order " +
                              std::to_string(fit.lags) +
                              ": it needs more than p + k = " + std::to_string(fit.lags + k) +
                              " (k = " + std::to_string(k) + " regressors per equation)");
  }
  // Bartlett weights 1 - l/(L+1) need L below the T estimation rows; beyond T - 1 every lag is
  // already in (Newey & West 1987; the bound itself is common practice).
  if (fit.covariance.kind == CovarianceKind::kHAC && fit.covariance.hac_lags >= rows - fit.lags) {
    return BadOption("--hac-lags " + std::to_string(fit.covariance.hac_lags) +
                     ": must be below the " + std::to_string(rows - fit.lags) + " estimation rows");
  }
  // Criteria: every p = 0..pmax is fitted on rows - pmax rows with k_p = d + n p regressors
  // (common sample: Luetkepohl 2005, Sec. 4.3), and each fit needs rows - pmax > k_p.
  const long pmax = fit.criteria_pmax;
  if (pmax >= 0 && rows - pmax <= d + n * pmax) {
    return BadAgainstFile(table, table.lines.back(),
                          "--criteria " + std::to_string(pmax) + ": " + std::to_string(rows) +
                              " observations are too few; fitting p = " + std::to_string(pmax) +
                              " on a common sample needs more than " +
                              std::to_string(pmax + d + n * pmax));
  }
  return {};
}

// FitVar failed after the checks above: the data cannot carry the model (exit 3), or a rule
// the checks did not anticipate (exit 2).
Problem EngineFailure(const Status& status, const CsvTable& table) {
  const bool not_estimable =
      status.code() == StatusCode::kRankDeficient || status.code() == StatusCode::kNumerical;
  if (not_estimable) {
    return {kExitNotEstimable,
            table.path + ": the model cannot be estimated: " + status.ToString()};
  }
  return BadInput(table.path + ": " + status.ToString());
}

Problem Fit(const FitCommandOptions& options, const CsvTable& table, FitOptions* fit,
            FitReport* report) {
  Problem p = ParseModelOptions(options, fit);
  for (std::size_t i = 0; p.ok() && i < options.granger.size(); ++i) {
    fit->granger.emplace_back();
    p = ParseGranger(options.granger[i], table, &fit->granger.back());
  }
  if (p.ok()) p = CheckAgainstData(*fit, table);
  if (!p.ok()) return p;
  using RowMajor = Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor>;
  const Eigen::Map<const RowMajor> data(table.values.data(),
                                        static_cast<Eigen::Index>(table.rows()),
                                        static_cast<Eigen::Index>(table.cols()));
  const Status status = FitVar(data, table.names, *fit, report);
  if (!status.ok()) return EngineFailure(status, table);
  if (fit->criteria_pmax >= 0 && !report->criteria_status.ok()) {
    return BadInput(table.path + ": --criteria: " + report->criteria_status.ToString());
  }
  return {};
}

}  // namespace

int RunFit(const FitCommandOptions& options, std::ostream& out, std::ostream& err) {
  CsvTable table;
  CsvError csv_error;
  if (!ReadCsvTable(options.csv, &table, &csv_error)) {
    err << csv_error.ToString() << "\n";
    return kExitBadInput;
  }
  FitOptions fit;
  FitReport report;
  const Problem p = Fit(options, table, &fit, &report);
  if (!p.ok()) {
    err << p.message << "\n";
    return p.code;
  }
  std::ostringstream text;
  if (options.json) {
    text << FitReportJson(table, fit, report).dump(2) << "\n";
  } else {
    WriteFitText(table, fit, report, text);
  }
  out << text.str();
  out.flush();
  return out ? kExitOk : kExitInternal;
}

Command RegisterFitCommand(CLI::App* parent) {
  auto options = std::make_shared<FitCommandOptions>();
  CLI::App* sub = parent->add_subcommand("fit", kFitDescription);
  sub->add_option("--csv", options->csv, "input CSV file (format below)")
      ->required()
      ->type_name("FILE");
  sub->add_option("--lags", options->lags, "lag order P >= 1")->required()->type_name("P");
  sub->add_option("--deterministic", options->deterministic,
                  "deterministic terms (trend = constant + linear trend)")
      ->check(CLI::IsMember({"none", "constant", "trend"}))
      ->capture_default_str();
  sub->add_option("--covariance", options->covariance,
                  "coefficient covariance behind standard errors and tests "
                  "(HC*: White-type sandwich; HAC: Newey-West)")
      ->check(CLI::IsMember({"classical", "HC0", "HC1", "HC2", "HC3", "HAC"}))
      ->capture_default_str();
  CLI::Option* hac = sub->add_option("--hac-lags", options->hac_lags,
                                     "HAC only: Bartlett lag L >= 0; -1 = floor(4 (T/100)^(2/9))")
                         ->type_name("L")
                         ->capture_default_str();
  sub->add_option("--exclude-lag", options->exclude_lags,
                  "Wald test that every lag-J coefficient is zero (repeatable)")
      ->type_name("J");
  sub->add_option("--granger", options->granger,
                  "Wald test of no Granger causality, e.g. b,c:a (repeatable)")
      ->type_name("CAUSE:EFFECT");
  sub->add_option("--criteria", options->criteria_pmax,
                  "lag-order criteria for p = 0..PMAX on a common sample")
      ->type_name("PMAX")
      ->check(CLI::NonNegativeNumber);
  sub->add_flag("--json", options->json, "print one JSON document instead of the report");
  sub->footer(std::string(kFitFooter) + kExitCodeHelp);
  return Command{sub, [options, hac] {
                   options->hac_lags_given = hac->count() > 0;
                   return RunFit(*options, std::cout, std::cerr);
                 }};
}

}  // namespace rimwatch::cli
