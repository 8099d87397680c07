// FitVar: the batch face of the streaming engine. Feeds every row through a VarEstimator with the
// expanding window (exact OLS = Gaussian ML per equation) and collects the inference a batch VAR
// fit reports: coefficients with standard errors, residual covariances, companion eigenvalues,
// spectral radius with its delta-method SE, Wald tests and lag-order criteria.
// `rimwatch fit` prints this; `rimwatch replay` ends with it. One code path, no second estimator.
#pragma once

#include <Eigen/Core>
#include <complex>
#include <string>
#include <vector>

#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/covariance.h"
#include "rimwatch/engine/diagnostics.h"
#include "rimwatch/engine/lag_order.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"
#include "rimwatch/engine/var_spec.h"
#include "rimwatch/engine/wald.h"

namespace rimwatch {

struct GrangerRequest {
  std::vector<std::string> cause;
  std::vector<std::string> effect;
};

struct FitOptions {
  int lags = 1;
  Deterministic deterministic = Deterministic::kConstant;
  CovarianceOptions covariance;         // standard errors, rho SE and Wald tests use this kind
  std::vector<int> exclude_lags;        // Wald test "all coefficients of lag j are zero"
  std::vector<GrangerRequest> granger;  // Wald tests of Granger non-causality
  int criteria_pmax = -1;               // >= 0: lag-order criteria for p = 0..pmax
};

struct NamedWaldResult {
  std::string name;
  Status status;  // not OK: the test could not be computed (message says why)
  WaldResult result;
};

// One line of the residual diagnostics, flattened for reports: a system test (variable empty) or
// one equation's test. df is a count of restrictions (chi-squared tests).
struct DiagnosticLine {
  std::string name;      // "arch_lm", "ljung_box", "jarque_bera", "portmanteau",
                         // "breusch_godfrey", "normality"
  std::string variable;  // equation's variable for per-equation tests, else empty
  Status status;         // not OK: unavailable here, message says why
  double statistic = 0.0;
  double df = 0.0;
  double p_value = 1.0;
};

// The diagnostics of a sample as lines, in a fixed order.
std::vector<DiagnosticLine> FlattenDiagnostics(const ResidualDiagnostics& d, const VarSpec& spec);

struct FitReport {
  VarSpec spec;
  std::int64_t rows = 0;      // estimation rows (observations - p)
  int first_row = 0;          // 0-based data row of the first estimation row (= p)
  Eigen::MatrixXd phi;        // n x k
  Eigen::MatrixXd std_error;  // n x k, from the chosen covariance
  Eigen::MatrixXd sigma;      // df-adjusted
  Eigen::MatrixXd sigma_ml;
  CovarianceInfo covariance_info;
  std::vector<std::complex<double>> eigenvalues;
  double spectral_radius = 0.0;
  Status spectral_radius_se_status;  // not OK: SE unavailable, with the reason
  double spectral_radius_se = 0.0;
  std::vector<NamedWaldResult> tests;
  // Residual misspecification tests on the estimation rows (diagnostics.h, default orders).
  std::vector<DiagnosticLine> diagnostics;
  Status criteria_status;
  std::vector<LagCriteria> criteria;
};

// The current estimate of any estimator, summarised: coefficients with standard errors of the
// chosen kind, sigmas, companion eigenvalues, rho with its SE, and one Wald test per restriction.
// Fills every field of *out except rows/first_row/criteria. Shared by FitVar and the Monitor.
// with_diagnostics = false leaves out->diagnostics empty (the residual tests cost more than the
// rest of the summary; periodic snapshots do not store them).
Status SummarizeEstimate(const VarEstimator& est, const CovarianceOptions& covariance,
                         const std::vector<LinearRestriction>& restrictions, FitReport* out,
                         bool with_diagnostics = true);
// The same from parts already computed for est's current state: ctx = CovarianceContext::Create
// (est, covariance) and spectrum = ComputeCompanionSpectrum(spec, phi, with_gradient = true)
// with phi est's coefficients. Gives SummarizeEstimate's result to the last bit (it is what
// SummarizeEstimate runs after computing them); a caller that has them saves that work.
Status SummarizeWith(const VarEstimator& est, const CovarianceContext& ctx,
                     const CompanionSpectrum& spectrum,
                     const std::vector<LinearRestriction>& restrictions, FitReport* out,
                     bool with_diagnostics = true);

// data: rows x n (oldest first), names: n variable names. Errors: invalid options, non-finite
// data (naming the row and variable), too few rows, rank deficiency.
Status FitVar(const Eigen::Ref<const Eigen::MatrixXd>& data, const std::vector<std::string>& names,
              const FitOptions& options, FitReport* out);

}  // namespace rimwatch
