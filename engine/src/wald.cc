#include "rimwatch/engine/wald.h"

#include <Eigen/Dense>
#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <boost/math/distributions/fisher_f.hpp>
#include <cmath>
#include <set>

namespace rimwatch {

double ChiSquaredSurvival(double x, double df) {
  if (!(x > 0.0)) return 1.0;
  if (std::isinf(x)) return 0.0;
  return boost::math::cdf(boost::math::complement(boost::math::chi_squared(df), x));
}

double FSurvival(double x, double df1, double df2) {
  if (!(x > 0.0)) return 1.0;
  if (std::isinf(x)) return 0.0;
  return boost::math::cdf(boost::math::complement(boost::math::fisher_f(df1, df2), x));
}

Status ExcludeLagRestriction(const VarSpec& spec, int lag, LinearRestriction* out) {
  if (lag < 1 || lag > spec.lags) {
    return Status::InvalidArgument("exclude lag " + std::to_string(lag) + ": must lie in 1.." +
                                   std::to_string(spec.lags));
  }
  const int n = spec.n();
  const int k = spec.k();
  out->name = "exclude_lag_" + std::to_string(lag);
  out->r_matrix = Eigen::MatrixXd::Zero(n * n, n * k);
  out->r_value = Eigen::VectorXd::Zero(n * n);
  int row = 0;
  for (int eq = 0; eq < n; ++eq) {
    for (int var = 0; var < n; ++var)
      out->r_matrix(row++, eq * k + spec.LagRegressor(lag, var)) = 1.0;
  }
  return Status::Ok();
}

Status GrangerRestriction(const VarSpec& spec, const std::vector<int>& cause,
                          const std::vector<int>& effect, LinearRestriction* out) {
  if (cause.empty() || effect.empty()) {
    return Status::InvalidArgument("granger: cause and effect groups must both be non-empty");
  }
  const int n = spec.n();
  std::set<int> seen;
  for (int v : cause) {
    if (v < 0 || v >= n) return Status::InvalidArgument("granger: cause index out of range");
    seen.insert(v);
  }
  for (int v : effect) {
    if (v < 0 || v >= n) return Status::InvalidArgument("granger: effect index out of range");
    if (seen.count(v)) {
      return Status::InvalidArgument("granger: variable '" + spec.variables[v] +
                                     "' is in both the cause and the effect group");
    }
  }
  const int k = spec.k();
  const int q = static_cast<int>(cause.size() * effect.size()) * spec.lags;
  std::string name = "granger_";
  for (std::size_t i = 0; i < cause.size(); ++i) name += (i ? "," : "") + spec.variables[cause[i]];
  name += "_to_";
  for (std::size_t i = 0; i < effect.size(); ++i)
    name += (i ? "," : "") + spec.variables[effect[i]];
  out->name = name;
  out->r_matrix = Eigen::MatrixXd::Zero(q, n * k);
  out->r_value = Eigen::VectorXd::Zero(q);
  int row = 0;
  for (int eq : effect) {
    for (int lag = 1; lag <= spec.lags; ++lag) {
      for (int var : cause) out->r_matrix(row++, eq * k + spec.LagRegressor(lag, var)) = 1.0;
    }
  }
  return Status::Ok();
}

Status UserRestriction(const VarSpec& spec, std::string name, Eigen::MatrixXd r_matrix,
                       Eigen::VectorXd r_value, LinearRestriction* out) {
  const int nk = spec.n() * spec.k();
  if (r_matrix.rows() < 1 || r_matrix.cols() != nk) {
    return Status::InvalidArgument("restriction '" + name + "': R must have at least one row and " +
                                   std::to_string(nk) + " columns (n k); it has " +
                                   std::to_string(r_matrix.cols()));
  }
  if (r_value.size() != r_matrix.rows()) {
    return Status::InvalidArgument("restriction '" + name +
                                   "': r must have one entry per row of R");
  }
  if (!r_matrix.allFinite() || !r_value.allFinite()) {
    return Status::NonFinite("restriction '" + name + "': R and r must be finite");
  }
  out->name = std::move(name);
  out->r_matrix = std::move(r_matrix);
  out->r_value = std::move(r_value);
  return Status::Ok();
}

Status WaldTest(const Eigen::Ref<const Eigen::VectorXd>& theta,
                const LinearRestriction& restriction, const Eigen::Ref<const Eigen::MatrixXd>& rvr,
                double dof, WaldResult* out) {
  const Eigen::Index q = restriction.r_matrix.rows();
  if (dof <= 0.0) return Status::NotEnoughRows("Wald test needs T_eff - k > 0");
  const Eigen::VectorXd d = restriction.r_matrix * theta - restriction.r_value;
  // Symmetric eigen-decomposition: rank check against the largest eigenvalue.
  Eigen::SelfAdjointEigenSolver<Eigen::MatrixXd> es(0.5 * (rvr + rvr.transpose()));
  if (es.info() != Eigen::Success) return Status::Numerical("eigen solver failed on R V R'");
  const double top = es.eigenvalues().maxCoeff();
  const double tol = 1e-12 * static_cast<double>(q) * std::max(top, 0.0);
  if (!(top > 0.0) || es.eigenvalues().minCoeff() <= tol) {
    return Status::RankDeficient(
        "restriction '" + restriction.name +
        "': R V R' is singular (redundant rows or a degenerate covariance)");
  }
  const Eigen::VectorXd proj = es.eigenvectors().transpose() * d;
  const double w = (proj.array().square() / es.eigenvalues().array()).sum();
  out->statistic = w;
  out->df = static_cast<int>(q);
  out->p_value = ChiSquaredSurvival(w, static_cast<double>(q));
  out->f_statistic = w / static_cast<double>(q);
  out->f_df1 = static_cast<int>(q);
  out->f_df2 = dof;
  out->f_p_value = FSurvival(out->f_statistic, static_cast<double>(q), dof);
  return Status::Ok();
}

}  // namespace rimwatch
