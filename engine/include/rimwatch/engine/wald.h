// Linear restrictions R theta = r on theta = vec(Phi') and their Wald tests.
//
// W = (R theta - r)' (R V R')^{-1} (R theta - r) is asymptotically chi-squared(q) under H0 for any
// consistent V (classical under homoskedasticity, HC*/HAC otherwise). The F form W / q is reported
// against F(q, T - k), the single-equation small-sample convention (statsmodels' VAR F test uses
// n (T - k) instead; say which when comparing).
#pragma once

#include <Eigen/Core>
#include <string>
#include <vector>

#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

struct LinearRestriction {
  std::string name;
  Eigen::MatrixXd r_matrix;  // q x (n k)
  Eigen::VectorXd r_value;   // q
};

// All n^2 coefficients of lag `lag` are zero (lag-order reduction). REQUIRES 1 <= lag <= p.
Status ExcludeLagRestriction(const VarSpec& spec, int lag, LinearRestriction* out);
// Granger non-causality: the variables in `cause` do not help predict those in `effect`:
// every coefficient of a cause variable, at every lag, in every effect equation is zero.
// REQUIRES: both groups non-empty, disjoint, valid indices.
Status GrangerRestriction(const VarSpec& spec, const std::vector<int>& cause,
                          const std::vector<int>& effect, LinearRestriction* out);
// A user matrix; checks shapes and finiteness.
Status UserRestriction(const VarSpec& spec, std::string name, Eigen::MatrixXd r_matrix,
                       Eigen::VectorXd r_value, LinearRestriction* out);

struct WaldResult {
  double statistic = 0.0;  // W
  int df = 0;              // q
  double p_value = 1.0;    // P(chi2(q) > W)
  double f_statistic = 0.0;
  int f_df1 = 0;
  double f_df2 = 0.0;  // T_eff - k
  double f_p_value = 1.0;
};

// REQUIRES: rvr is q x q (R V R'), theta has n k entries. Fails with kRankDeficient when R V R'
// is singular to working accuracy (e.g. redundant restriction rows), or kNotEnoughRows when
// dof <= 0.
Status WaldTest(const Eigen::Ref<const Eigen::VectorXd>& theta,
                const LinearRestriction& restriction, const Eigen::Ref<const Eigen::MatrixXd>& rvr,
                double dof, WaldResult* out);

// Upper-tail probabilities (Boost.Math).
double ChiSquaredSurvival(double x, double df);
double FSurvival(double x, double df1, double df2);

}  // namespace rimwatch
