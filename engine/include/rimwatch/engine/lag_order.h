// Lag-order selection criteria for p = 0..pmax on a common sample.
//
// Every p is fitted by least squares on the same rows: the first pmax observations are held out
// as presample for all p, so T = rows - pmax. From the ML residual covariance Omega_p (divided by
// T):
//   AIC = ln|Omega_p| + 2 m / T              (Akaike 1974)
//   HQ  = ln|Omega_p| + 2 ln(ln T) m / T     (Hannan & Quinn 1979)
//   SC  = ln|Omega_p| + ln(T) m / T          (Schwarz 1978; "bic")
//   FPE = ((T + k_p) / (T - k_p))^n |Omega_p|  (Akaike 1969)
// m = p n^2 + n d counts every estimated coefficient of the system (d deterministic terms), and
// k_p = d + n p is the regressor count per equation: statsmodels' VARResults.info_criteria
// convention (Luetkepohl 2005, Sec. 4.3, counts only the p n^2 lag coefficients; the selected
// order is the same because the difference does not depend on p).
#pragma once

#include <Eigen/Core>
#include <vector>

#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

struct LagCriteria {
  int lags = 0;
  Status status;  // not OK: the fit for this p is rank deficient or has too few rows
  double aic = 0.0;
  double hq = 0.0;
  double bic = 0.0;
  double fpe = 0.0;
};

// data: rows x n observations (oldest first). REQUIRES pmax >= 0. p = 0 is skipped when
// deterministic is kNone (nothing to estimate). Fails when rows - pmax <= 0.
Status LagOrderCriteria(const Eigen::Ref<const Eigen::MatrixXd>& data, Deterministic deterministic,
                        int pmax, std::vector<LagCriteria>* out);

}  // namespace rimwatch
