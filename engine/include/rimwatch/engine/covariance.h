// Coefficient covariance of theta = vec(Phi') (equation by equation, theta[eq * k + j]).
//
// With A = (X'WX)^{-1}, residuals e_t = y_t - Phi x_t over the buffered rows and
// g_t = w_t e_t (x) x_t:
//   classical  V = Omega (x) A (X'W^2X) A       (= Omega (x) A for unit weights), Omega =
//   df-adjusted HC0        V = (I (x) A) [sum_t g_t g_t'] (I (x) A)                 (White 1980)
//   HC1        HC0 * T / (T - k)
//   HC2, HC3   e_t replaced by e_t / sqrt(1 - h_t), e_t / (1 - h_t), h_t = w_t x_t' A x_t
//              (MacKinnon & White 1985)
//   HAC        meat sum_{|l| <= L} (1 - |l| / (L + 1)) Gamma_l, Gamma_l = sum_t g_t g_{t-l}'
//              (Newey & West 1987; default L = floor(4 (T/100)^(2/9)), Newey & West 1994)
// Cheap path for tests: with B = R (I (x) A), R V R' = sum over the meat of s_t = B g_t, which
// costs O(rows q n k) instead of O(rows (n k)^2).
//
// Thread safety: a built CovarianceContext is immutable; const calls may run concurrently.
#pragma once

#include <Eigen/Core>
#include <cstddef>
#include <string>

#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_estimator.h"

namespace rimwatch {

enum class CovarianceKind { kClassical, kHC0, kHC1, kHC2, kHC3, kHAC };

const char* CovarianceKindName(CovarianceKind kind);  // "classical", "HC0", ..., "HAC"
bool ParseCovarianceKind(const std::string& text, CovarianceKind* out);

struct CovarianceOptions {
  CovarianceKind kind = CovarianceKind::kHC3;
  // HAC only: Bartlett truncation lag L >= 0; -1 selects floor(4 (T/100)^(2/9)).
  int hac_lags = -1;
};

struct CovarianceInfo {
  std::size_t rows_used = 0;  // buffered rows the meat and residuals came from
  bool truncated = false;     // the window has more rows than the buffer kept
  int hac_lags = 0;           // L actually used (HAC)
  double dof = 0.0;           // T_eff - k
};

// Rule-of-thumb Newey-West lag floor(4 (T/100)^(2/9)).
int NeweyWestLags(std::size_t rows);

class CovarianceContext {
 public:
  // Snapshot the estimator: coefficients, A, residuals and (HC2/HC3) leverages of the buffered
  // rows. Fails with the estimator's rank status, kNotEnoughRows when T_eff <= k, or kNumerical
  // when a leverage is 1 (HC2/HC3 undefined).
  static Status Create(const VarEstimator& est, const CovarianceOptions& options,
                       CovarianceContext* out);

  // Full covariance of theta, (n k) x (n k). Cost O(rows (n k)^2).
  Eigen::MatrixXd Full() const;
  // R V R' for R of shape q x (n k). Cost O(rows q n k + q n k^2).
  Eigen::MatrixXd Restricted(const Eigen::Ref<const Eigen::MatrixXd>& r) const;

  const Eigen::MatrixXd& phi() const { return phi_; }  // n x k
  Eigen::VectorXd theta() const;                       // vec(Phi'), n k
  const Eigen::MatrixXd& omega() const { return omega_; }
  const CovarianceInfo& info() const { return info_; }
  const CovarianceOptions& options() const { return options_; }

 private:
  Eigen::MatrixXd Meat(const Eigen::Ref<const Eigen::MatrixXd>& s) const;

  CovarianceOptions options_;
  CovarianceInfo info_;
  int n_ = 0;
  int k_ = 0;
  double hc1_scale_ = 1.0;
  Eigen::MatrixXd phi_;       // n x k
  Eigen::MatrixXd a_;         // (X'WX)^{-1}
  Eigen::MatrixXd g_;         // classical: A X'W^2X A (or A)
  Eigen::MatrixXd omega_;     // df-adjusted residual covariance
  Eigen::MatrixXd x_;         // k x rows
  Eigen::MatrixXd scaled_e_;  // n x rows: w_t * c_t * e_t, c_t the HC2/HC3 factor (else 1)
};

}  // namespace rimwatch
