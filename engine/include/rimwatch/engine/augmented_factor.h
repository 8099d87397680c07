// AugmentedFactor: the upper-triangular factor of the weighted augmented cross-product matrix.
//
// Invariant: R is (k+n) x (k+n) upper triangular with
//     R'R = sum_t w_t z_t z_t',  z_t = [x_t; y_t],
// over the rows folded in (and not removed), where w_t is the product of the Scale() factors
// applied after row t was folded. Blocks: R11 (k x k), R12 (k x n), R22 (n x n), so that
//     Phi' = R11^{-1} R12        (least squares coefficients, a triangular solve)
//     sum_t w_t e_t e_t' = R22' R22   (residual cross-product, no pass over the data).
// The factor is never formed from X'X: rows enter by Givens rotations (O((k+n)^2) per row) and
// leave by the LINPACK Cholesky downdate (Saunders 1972; Dongarra et al. 1979, LINPACK Users'
// Guide, ch. 10, routine DCHDD), which reports infeasibility instead of producing garbage.
//
// Thread safety: none; one owner.
#pragma once

#include <Eigen/Core>
#include <vector>

namespace rimwatch {

class AugmentedFactor {
 public:
  AugmentedFactor(int k, int n);

  int k() const { return k_; }
  int n() const { return n_; }
  // Forget everything: R = 0.
  void Reset();
  // R'R <- factor * R'R (factor in (0, 1]: exponential forgetting multiplies R by sqrt(factor)).
  void Scale(double factor);
  // R'R <- R'R + z z'.  REQUIRES: z.size() == k + n, z finite.
  void Fold(const Eigen::Ref<const Eigen::VectorXd>& z);
  // R'R <- R'R - z z'. Returns false and leaves R unchanged when the result would not be
  // positive definite to working accuracy: with R' a = z, when 1 - |a|^2 <= min_slack, or when
  // R has a zero pivot. The caller then refolds from its row buffer.
  bool Downdate(const Eigen::Ref<const Eigen::VectorXd>& z, double min_slack = 1e-10);

  const Eigen::MatrixXd& R() const { return r_; }

  // Regressor columns j of R11 whose pivot is negligible, |r_jj| <= tol * |R11(0:j, j)|
  // (a column that is, to working accuracy, a combination of earlier ones, or is zero).
  // Empty means R11 has full column rank.
  std::vector<int> DeficientColumns(double tol = kRankTolerance) const;
  // DeficientColumns(tol).empty(), without building the list (the per-row check).
  bool FullColumnRank(double tol = kRankTolerance) const;
  static constexpr double kRankTolerance = 1e-10;

  // The following REQUIRE full column rank of R11 (DeficientColumns() empty).
  // Phi (n x k) = (R11^{-1} R12)'. The second form writes into *phi (its storage is reused when
  // it already has the shape) and gives the same values to the last bit.
  Eigen::MatrixXd Coefficients() const;
  void Coefficients(Eigen::MatrixXd* phi) const;
  // Residual cross-product sum_t w_t e_t e_t' = R22' R22 (n x n); needs no rank condition.
  Eigen::MatrixXd ResidualCrossProduct() const;
  // One-step prediction for a new row before it is folded in:
  //   u = R11^{-T} x,  f = 1 + |u|^2 = 1 + x'(X'WX)^{-1}x,  v = y - Phi x = y - R12' u.
  // u lives in per-thread scratch, so a warm caller allocates nothing.
  void Predict(const Eigen::Ref<const Eigen::VectorXd>& x,
               const Eigen::Ref<const Eigen::VectorXd>& y, Eigen::VectorXd* v, double* f) const;

 private:
  bool ColumnDeficient(int j, double tol) const;

  int k_;
  int n_;
  Eigen::MatrixXd r_;
  Eigen::VectorXd work_;  // scratch for Fold and Downdate: no allocation per row
  Eigen::VectorXd cos_;
  Eigen::VectorXd sin_;
};

}  // namespace rimwatch
