#include "rimwatch/engine/var_fit.h"

#include <algorithm>
#include <cmath>

#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {
namespace {

Status ResolveNames(const VarSpec& spec, const std::vector<std::string>& names,
                    std::vector<int>* out) {
  out->clear();
  for (const std::string& name : names) {
    const int i = spec.VariableIndex(name);
    if (i < 0) return Status::InvalidArgument("granger: unknown variable '" + name + "'");
    out->push_back(i);
  }
  return Status::Ok();
}

}  // namespace

std::vector<DiagnosticLine> FlattenDiagnostics(const ResidualDiagnostics& d, const VarSpec& spec) {
  std::vector<DiagnosticLine> out;
  const auto per_equation = [&](const char* name, const Status& st, const Eigen::VectorXd* stat,
                                const Eigen::VectorXd* p, double df) {
    for (int i = 0; i < spec.n(); ++i) {
      DiagnosticLine line{name, spec.variables[i], st, 0.0, df, 1.0};
      if (st.ok() && stat->size() != spec.n()) line.status = Status::Unavailable("not computed");
      if (line.status.ok()) {
        line.statistic = (*stat)[i];
        line.p_value = (*p)[i];
      }
      out.push_back(std::move(line));
    }
  };
  const auto system = [&](const char* name, const Status& st, double stat, double df, double p) {
    out.push_back(DiagnosticLine{name, "", st, st.ok() ? stat : 0.0, df, st.ok() ? p : 1.0});
  };
  per_equation("arch_lm", d.arch_status, &d.arch.statistic, &d.arch.p_value, d.arch.df);
  per_equation("ljung_box", d.ljung_box_status, &d.ljung_box.statistic, &d.ljung_box.p_value,
               d.ljung_box.df);
  per_equation("jarque_bera", d.jarque_bera_status, &d.jarque_bera.statistic,
               &d.jarque_bera.p_value, d.jarque_bera.df);
  system("portmanteau", d.portmanteau_status, d.portmanteau.statistic, d.portmanteau.df,
         d.portmanteau.p_value);
  system("breusch_godfrey", d.breusch_godfrey_status, d.breusch_godfrey.lm_statistic,
         d.breusch_godfrey.lm_df, d.breusch_godfrey.lm_p_value);
  system("normality", d.normality_status, d.normality.statistic, d.normality.df,
         d.normality.p_value);
  return out;
}

Status SummarizeEstimate(const VarEstimator& est, const CovarianceOptions& covariance,
                         const std::vector<LinearRestriction>& restrictions, FitReport* out,
                         bool with_diagnostics) {
  Eigen::MatrixXd phi;
  Status st = est.Coefficients(&phi);
  if (!st.ok()) return st;
  Eigen::MatrixXd sigma;
  st = est.SigmaAdjusted(&sigma);  // checked here to keep the order in which errors are reported
  if (!st.ok()) return st;
  CovarianceContext ctx;
  st = CovarianceContext::Create(est, covariance, &ctx);
  if (!st.ok()) return st;
  CompanionSpectrum spectrum;
  st = ComputeCompanionSpectrum(est.spec(), phi, /*with_gradient=*/true, &spectrum);
  if (!st.ok()) return st;
  return SummarizeWith(est, ctx, spectrum, restrictions, out, with_diagnostics);
}

Status SummarizeWith(const VarEstimator& est, const CovarianceContext& ctx,
                     const CompanionSpectrum& spectrum,
                     const std::vector<LinearRestriction>& restrictions, FitReport* out,
                     bool with_diagnostics) {
  const VarSpec& spec = est.spec();
  out->spec = spec;
  Status st = est.Coefficients(&out->phi);
  if (!st.ok()) return st;
  st = est.SigmaAdjusted(&out->sigma);
  if (!st.ok()) return st;
  st = est.SigmaMl(&out->sigma_ml);
  if (!st.ok()) return st;

  out->covariance_info = ctx.info();
  const Eigen::MatrixXd v = ctx.Full();
  const int n = spec.n();
  const int k = spec.k();
  out->std_error.resize(n, k);
  for (int eq = 0; eq < n; ++eq) {
    for (int j = 0; j < k; ++j) {
      out->std_error(eq, j) = std::sqrt(std::max(0.0, v(eq * k + j, eq * k + j)));
    }
  }

  out->eigenvalues = spectrum.eigenvalues;
  out->spectral_radius = spectrum.spectral_radius;
  out->spectral_radius_se_status = spectrum.gradient_status;
  if (spectrum.gradient_status.ok()) {
    const double var = (spectrum.gradient.transpose() * v * spectrum.gradient)(0, 0);
    out->spectral_radius_se = std::sqrt(std::max(0.0, var));
  }

  ResidualSample sample;
  out->diagnostics.clear();
  if (with_diagnostics && WindowResiduals(est, 0, &sample).ok()) {
    out->diagnostics =
        FlattenDiagnostics(RunResidualDiagnostics(sample, DiagnosticOptions()), spec);
  }

  out->tests.clear();
  const Eigen::VectorXd theta = ctx.theta();
  for (const LinearRestriction& restriction : restrictions) {
    NamedWaldResult named;
    named.name = restriction.name;
    const Eigen::MatrixXd rvr = ctx.Restricted(restriction.r_matrix);
    named.status = WaldTest(theta, restriction, rvr, ctx.info().dof, &named.result);
    out->tests.push_back(std::move(named));
  }
  return Status::Ok();
}

Status FitVar(const Eigen::Ref<const Eigen::MatrixXd>& data, const std::vector<std::string>& names,
              const FitOptions& options, FitReport* out) {
  VarSpec spec;
  spec.variables = names;
  spec.lags = options.lags;
  spec.deterministic = options.deterministic;
  spec.window.kind = WindowKind::kExpanding;
  spec.window.robust_row_cap = std::max<std::size_t>(1, static_cast<std::size_t>(data.rows()));
  std::string why;
  if (!spec.IsValid(&why)) return Status::InvalidArgument(why);
  if (data.cols() != spec.n()) {
    return Status::InvalidArgument("data has " + std::to_string(data.cols()) + " columns for " +
                                   std::to_string(spec.n()) + " variables");
  }
  const int k = spec.k();
  if (data.rows() - spec.lags <= k) {
    return Status::NotEnoughRows("need more than p + k = " + std::to_string(spec.lags + k) +
                                 " rows for lag order " + std::to_string(spec.lags) + "; have " +
                                 std::to_string(data.rows()));
  }
  *out = FitReport();
  out->spec = spec;
  out->first_row = spec.lags;
  VarEstimator est(spec);
  for (Eigen::Index r = 0; r < data.rows(); ++r) {
    UpdateResult u = est.Update(data.row(r).transpose());
    if (!u.status.ok()) {
      return Status(
          u.status.code() == StatusCode::kNonFinite
              ? Status::NonFinite("data row " + std::to_string(r + 1) + ": " + u.status.message())
              : u.status);
    }
  }
  std::vector<LinearRestriction> restrictions;
  for (int lag : options.exclude_lags) {
    LinearRestriction restriction;
    Status st = ExcludeLagRestriction(spec, lag, &restriction);
    if (!st.ok()) return st;
    restrictions.push_back(std::move(restriction));
  }
  for (const GrangerRequest& g : options.granger) {
    std::vector<int> cause, effect;
    Status st = ResolveNames(spec, g.cause, &cause);
    if (!st.ok()) return st;
    st = ResolveNames(spec, g.effect, &effect);
    if (!st.ok()) return st;
    LinearRestriction restriction;
    st = GrangerRestriction(spec, cause, effect, &restriction);
    if (!st.ok()) return st;
    restrictions.push_back(std::move(restriction));
  }
  Status st = SummarizeEstimate(est, options.covariance, restrictions, out);
  if (!st.ok()) return st;
  out->rows = est.rows_estimated();
  if (options.criteria_pmax >= 0) {
    out->criteria_status =
        LagOrderCriteria(data, spec.deterministic, options.criteria_pmax, &out->criteria);
  }
  return Status::Ok();
}

}  // namespace rimwatch
