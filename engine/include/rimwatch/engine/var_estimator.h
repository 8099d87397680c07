// VarEstimator: a VAR(p) estimated recursively, one observation at a time.
//
// Each Update(y_t) appends y_t to the lag history. Once p earlier observations exist, the row
// z_t = [x_t; y_t] enters estimation: its one-step prediction error against the current estimate
// is computed, then it is folded into the AugmentedFactor according to the window:
//   expanding   R'R = sum_t z_t z_t'                        (exact OLS on every row)
//   sliding     R'R = sum_{t > T-W} z_t z_t'                (fold, then downdate the oldest row)
//   forgetting  R'R = sum_t lambda^(T-t) z_t z_t'           (scale by lambda, then fold)
// The most recent rows are kept in a RowBuffer for robust covariances and for refolding.
//
// A row holding NaN or +-Inf is refused (Status kNonFinite) and the state is unchanged.
// Rank deficiency (a constant or collinear series, fewer rows than regressors) is a reported
// state: Coefficients() returns kRankDeficient naming the regressors, never NaN.
//
// Thread safety: none; one owner. Deterministic: the same inputs give bit-identical state.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <vector>

#include "rimwatch/engine/augmented_factor.h"
#include "rimwatch/engine/row_buffer.h"
#include "rimwatch/engine/status.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {

struct UpdateResult {
  Status status;           // not OK: the row was refused and nothing changed
  bool estimated = false;  // the row entered estimation (its p lags were available)
  // One-step prediction before folding this row in (only when the estimate before it was full
  // rank): v = y_t - Phi_{t-1} x_t and f = 1 + x_t' (X'WX)_{t-1}^{-1} x_t; v / sqrt(f) is the
  // recursive residual.
  bool has_prediction = false;
  Eigen::VectorXd prediction_error;
  double prediction_scale = 0.0;  // f
};

class VarEstimator {
 public:
  // REQUIRES: spec.IsValid(nullptr, /*allow_zero_lags=*/true).
  explicit VarEstimator(VarSpec spec);

  // Feed the next observation (n values in spec.variables order). predict = false skips the
  // one-step prediction (has_prediction stays false) for a caller that does not read it; the
  // estimator's state afterwards is the same either way.
  UpdateResult Update(const Eigen::Ref<const Eigen::VectorXd>& y, bool predict = true);

  const VarSpec& spec() const { return spec_; }
  int k() const { return k_; }
  int n() const { return n_; }
  // Observations given, including the p presample ones.
  std::int64_t observations() const { return observations_; }
  // Rows that ever entered estimation (the latest row's trend value is this plus p).
  std::int64_t rows_estimated() const { return rows_estimated_; }
  // Rows in the estimate now (sliding: at most W; forgetting: all, down-weighted).
  std::int64_t rows_in_window() const;
  // T_eff = sum of weights: rows for expanding/sliding, (1 - lambda^T) / (1 - lambda) forgetting.
  double effective_rows() const { return effective_rows_; }

  // OK, or kRankDeficient naming the deficient regressors, or kNotEnoughRows before any row.
  Status RankStatus() const;
  // Phi (n x k). Fails with RankStatus() when the window is rank deficient.
  Status Coefficients(Eigen::MatrixXd* phi) const;
  // sum_t w_t e_t e_t' (n x n), ML residual covariance (/ T_eff), df-adjusted (/ (T_eff - k)).
  Eigen::MatrixXd ResidualCrossProduct() const { return factor_.ResidualCrossProduct(); }
  Status SigmaMl(Eigen::MatrixXd* sigma) const;
  Status SigmaAdjusted(Eigen::MatrixXd* sigma) const;

  const AugmentedFactor& factor() const { return factor_; }
  const RowBuffer& buffer() const { return buffer_; }
  // Weight of a buffered row with estimation index t (1-based): lambda^(T - t), or 1.
  double WeightOf(std::int64_t t) const;
  // Number of refolds done so far (sliding window), for tests and diagnostics.
  std::int64_t refolds() const { return refolds_; }
  // The regressor vector the next observation would get (needs p observations so far).
  bool NextRegressors(Eigen::VectorXd* x) const;

 private:
  void BuildRegressors(std::int64_t t, Eigen::Ref<Eigen::VectorXd> x) const;
  void Refold();

  VarSpec spec_;
  int n_;
  int k_;
  AugmentedFactor factor_;
  RowBuffer buffer_;
  Eigen::MatrixXd history_;  // n x p ring of the last p observations
  int history_head_ = 0;     // column of the most recent observation
  std::int64_t observations_ = 0;
  std::int64_t rows_estimated_ = 0;
  double effective_rows_ = 0.0;
  std::int64_t downdates_since_refold_ = 0;
  std::int64_t refolds_ = 0;
  Eigen::VectorXd z_;  // work row [x; y]
};

}  // namespace rimwatch
