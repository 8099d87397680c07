// Companion structure and the stationarity condition of a bivariate VAR(2), checked on random
// coefficient draws against criteria that never look at the companion matrix.
//
// Law (Luetkepohl 2005, "New Introduction to Multiple Time Series Analysis", Sec. 2.1.1): with
// F = [A1 A2; I 0] the VAR is stable (stationary) iff every eigenvalue of F lies strictly inside
// the unit circle, equivalently iff det(I - A1 z - A2 z^2) != 0 for |z| <= 1. Since
//   det(lambda^2 I - lambda A1 - A2) = lambda^4 det(I - A1 z - A2 z^2),  z = 1 / lambda,
// the eigenvalues of F are the roots of the scalar quartic det(lambda^2 I - lambda A1 - A2).
// Independent criteria used here:
//   (1) the Schur-Cohn test on that quartic (no eigen solver),
//   (2) the quartic's roots from Eigen's PolynomialSolver, compared with the spectral radius,
//   (3) the backward error of each reported eigenvalue as a root of the matrix polynomial,
//   (4) the growth rate of a noise-free path y_t = A1 y_{t-1} + A2 y_{t-2}, which tends to
//       ln(rho) (Gelfand's formula, rho = lim ||F^t||^(1/t); common practice).
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <string>
#include <unsupported/Eigen/Polynomials>
#include <vector>

#include "mc_support.h"
#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

VarSpec BivariateSpec(int lags, Deterministic deterministic) {
  VarSpec spec;
  spec.variables = {"alpha", "beta"};
  spec.lags = lags;
  spec.deterministic = deterministic;
  return spec;
}

// Phi = [c | A1 | A2] (2 x 5) for the constant-only spec.
Eigen::MatrixXd PhiOf(const Eigen::Matrix2d& a1, const Eigen::Matrix2d& a2) {
  Eigen::MatrixXd phi(2, 5);
  phi << 0.25, a1(0, 0), a1(0, 1), a2(0, 0), a2(0, 1),  //
      -0.5, a1(1, 0), a1(1, 1), a2(1, 0), a2(1, 1);
  return phi;
}

// Polynomials as ascending coefficient vectors (c[i] multiplies lambda^i).
Eigen::VectorXd Multiply(const Eigen::VectorXd& p, const Eigen::VectorXd& q) {
  Eigen::VectorXd r = Eigen::VectorXd::Zero(p.size() + q.size() - 1);
  for (Eigen::Index i = 0; i < p.size(); ++i) {
    for (Eigen::Index j = 0; j < q.size(); ++j) r[i + j] += p[i] * q[j];
  }
  return r;
}

// det(lambda^2 I - lambda A1 - A2) = m11 m22 - m12 m21, m_ij = delta_ij lambda^2 - A1_ij lambda
// - A2_ij: a monic quartic, ascending coefficients.
Eigen::VectorXd CharacteristicQuartic(const Eigen::Matrix2d& a1, const Eigen::Matrix2d& a2) {
  auto entry = [&](int i, int j) {
    Eigen::VectorXd m(3);
    m << -a2(i, j), -a1(i, j), i == j ? 1.0 : 0.0;
    return m;
  };
  return Multiply(entry(0, 0), entry(1, 1)) - Multiply(entry(0, 1), entry(1, 0));
}

// Schur-Cohn test in its step-down (reflection coefficient) form: for the monic real polynomial
// lambda^m + a_1 lambda^(m-1) + ... + a_m, take k_m = a_m; all roots lie strictly inside the unit
// circle iff |k_m| < 1 and the degree m-1 polynomial a'_i = (a_i - k_m a_(m-i)) / (1 - k_m^2)
// passes in turn. Source: Schur 1917 / Cohn 1922; the step-down recursion as in Proakis &
// Manolakis, "Digital Signal Processing", 4th ed. 2007, Sec. 3.6.7 (section from memory).
bool SchurCohnStable(const Eigen::VectorXd& ascending) {
  const Eigen::Index m = ascending.size() - 1;
  Eigen::VectorXd a = ascending.reverse() / ascending[m];  // a[0] = 1, a[i] multiplies lambda^(m-i)
  for (Eigen::Index deg = m; deg >= 1; --deg) {
    const double k = a[deg];
    if (!(std::abs(k) < 1.0)) return false;
    Eigen::VectorXd next(deg);
    for (Eigen::Index i = 0; i < deg; ++i) next[i] = (a[i] - k * a[deg - i]) / (1.0 - k * k);
    a = next;
  }
  return true;
}

// Growth rate (1/T) ln(|s_T| / |s_0|) of the noise-free recursion from a random start, with
// renormalisation every step so explosive paths do not overflow.
double PathGrowthRate(const Eigen::Matrix2d& a1, const Eigen::Matrix2d& a2, int steps,
                      mc::GaussianSource* source) {
  Eigen::Vector2d prev = source->NormalVector(2);   // y_{t-1}
  Eigen::Vector2d prev2 = source->NormalVector(2);  // y_{t-2}
  double log_growth = -0.5 * std::log(prev.squaredNorm() + prev2.squaredNorm());
  for (int t = 0; t < steps; ++t) {
    const Eigen::Vector2d y = a1 * prev + a2 * prev2;
    prev2 = prev;
    prev = y;
    const double norm = std::sqrt(prev.squaredNorm() + prev2.squaredNorm());
    log_growth += std::log(norm);
    prev /= norm;
    prev2 /= norm;
  }
  return log_growth / steps;
}

double SpectralRadiusOf(const Eigen::Matrix2d& a1, const Eigen::Matrix2d& a2,
                        CompanionSpectrum* spectrum) {
  const Status st = ComputeCompanionSpectrum(BivariateSpec(2, Deterministic::kConstant),
                                             PhiOf(a1, a2), /*with_gradient=*/false, spectrum);
  EXPECT_TRUE(st.ok()) << st.ToString();
  return spectrum->spectral_radius;
}

// Layout: F = [A1 A2; I 0], deterministic columns of Phi left out. Constructed answer.
TEST(CompanionStructure, BivariateVar2HasA1A2OnTopAndIdentityBelow) {
  Eigen::Matrix2d a1, a2;
  a1 << 0.11, 0.12, 0.21, 0.22;
  a2 << 0.31, 0.32, 0.41, 0.42;
  const Eigen::MatrixXd f =
      CompanionMatrix(BivariateSpec(2, Deterministic::kConstant), PhiOf(a1, a2));
  Eigen::Matrix4d expected;
  expected << 0.11, 0.12, 0.31, 0.32,  //
      0.21, 0.22, 0.41, 0.42,          //
      1.0, 0.0, 0.0, 0.0,              //
      0.0, 1.0, 0.0, 0.0;
  ASSERT_EQ(f.rows(), 4);
  ASSERT_EQ(f.cols(), 4);
  EXPECT_EQ(f, expected);
}

// Same layout with two deterministic columns (constant, trend) to skip and p = 3.
TEST(CompanionStructure, TrendVar3SkipsBothDeterministicColumns) {
  Eigen::MatrixXd phi(2, 8);
  phi << 9.0, 8.0, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0,  //
      7.0, 6.0, 1.5, 2.5, 3.5, 4.5, 5.5, 6.5;
  const Eigen::MatrixXd f = CompanionMatrix(BivariateSpec(3, Deterministic::kTrend), phi);
  Eigen::MatrixXd expected = Eigen::MatrixXd::Zero(6, 6);
  expected.topRows(2) = phi.rightCols(6);
  expected.bottomLeftCorner(4, 4).setIdentity();
  EXPECT_EQ(f, expected);
}

// The independent criterion itself, on polynomials with known roots (constructed answers).
TEST(CompanionStationarity, SchurCohnClassifiesKnownPolynomials) {
  auto from_roots = [](std::vector<double> roots) {
    Eigen::VectorXd p = Eigen::VectorXd::Ones(1);
    for (double r : roots) p = Multiply(p, Eigen::Vector2d(-r, 1.0));
    return p;
  };
  EXPECT_TRUE(SchurCohnStable(from_roots({0.5, -0.9, 0.2, 0.99})));
  EXPECT_FALSE(SchurCohnStable(from_roots({0.5, -0.9, 0.2, 1.01})));
  EXPECT_FALSE(SchurCohnStable(from_roots({-1.2, 0.1})));
  // Complex pair 0.95 e^{+-i}: lambda^2 - 2 (0.95 cos 1) lambda + 0.95^2; and radius 1.05.
  EXPECT_TRUE(SchurCohnStable(Eigen::Vector3d(0.9025, -1.9 * std::cos(1.0), 1.0)));
  EXPECT_FALSE(SchurCohnStable(Eigen::Vector3d(1.1025, -2.1 * std::cos(1.0), 1.0)));
}

// Explosive cases whose entries are all below 1 in absolute value, with closed-form radii.
TEST(CompanionStationarity, ExplosiveCasesAreFlagged) {
  CompanionSpectrum spectrum;
  // alpha_t = 0.6 alpha_{t-1} + 0.5 alpha_{t-2}: lambda^2 - 0.6 lambda - 0.5 = 0,
  // rho = (0.6 + sqrt(0.36 + 2)) / 2 = 1.0681...; beta_t = 0.3 beta_{t-1}.
  Eigen::Matrix2d a1, a2;
  a1 << 0.6, 0.0, 0.0, 0.3;
  a2 << 0.5, 0.0, 0.0, 0.0;
  const double rho_ar2 = 0.5 * (0.6 + std::sqrt(2.36));
  EXPECT_NEAR(SpectralRadiusOf(a1, a2, &spectrum), rho_ar2, 16 * kEps);
  EXPECT_GT(spectrum.spectral_radius, 1.0);
  // A1 = [0.5 0.9; 0.9 0.5] has eigenvalues 1.4 and -0.4.
  a1 << 0.5, 0.9, 0.9, 0.5;
  a2.setZero();
  EXPECT_NEAR(SpectralRadiusOf(a1, a2, &spectrum), 1.4, 16 * kEps);
  // A scaled rotation, 1.05 [cos 0.7, -sin 0.7; sin 0.7, cos 0.7]: a complex pair of modulus 1.05.
  a1 << std::cos(0.7), -std::sin(0.7), std::sin(0.7), std::cos(0.7);
  a1 *= 1.05;
  EXPECT_NEAR(SpectralRadiusOf(a1, a2, &spectrum), 1.05, 16 * kEps);
  EXPECT_NE(spectrum.eigenvalues[0].imag(), 0.0);
  // Unit root: lambda^2 - 0.5 lambda - 0.5 = (lambda - 1)(lambda + 0.5): rho = 1, not stationary.
  a1 << 0.5, 0.0, 0.0, 0.2;
  a2 << 0.5, 0.0, 0.0, 0.0;
  EXPECT_NEAR(SpectralRadiusOf(a1, a2, &spectrum), 1.0, 16 * kEps);
}

struct DrawTally {
  int stable = 0;
  int explosive = 0;
  int near_unit = 0;  // |rho - 1| within kBoundaryMargin: classification left to rounding
  int paths_checked = 0;
  double worst_root_gap = 0.0;
  double worst_backward_error = 0.0;
  double worst_growth_gap = 0.0;
};

// Backward error of lambda as a root of M(lambda) = lambda^2 I - lambda A1 - A2: the smallest
// singular value of M(lambda) relative to |lambda|^2 + |lambda| |A1| + |A2| (common practice).
double BackwardError(const Eigen::Matrix2d& a1, const Eigen::Matrix2d& a2,
                     std::complex<double> lambda) {
  const Eigen::Matrix2cd m = lambda * lambda * Eigen::Matrix2cd::Identity() -
                             lambda * a1.cast<std::complex<double>>() -
                             a2.cast<std::complex<double>>();
  Eigen::JacobiSVD<Eigen::Matrix2cd> svd(m);
  const double scale = std::norm(lambda) + std::abs(lambda) * a1.norm() + a2.norm();
  return svd.singularValues()[1] / scale;
}

TEST(CompanionStationarity, RandomVar2AgreesWithIndependentCriteria) {
  constexpr int kDraws = 4000;
  constexpr int kPathSteps = 2000;
  // Draws this close to the unit circle are counted but not classified (rounding decides).
  constexpr double kBoundaryMargin = 1e-9;
  // Path growth is compared with ln(rho) only when rho is this far from 1 in log terms.
  constexpr double kPathMargin = 0.03;
  // |(1/T) ln|s_T| - ln rho| <= ln(C)/T for a start-dependent constant C (transients, Jordan
  // blocks, a small start component): 0.01 allows C up to e^20 at T = 2000.
  constexpr double kGrowthTolerance = 0.01;
  // Root moduli: near-double roots move by sqrt(eps) under rounding.
  constexpr double kRootTolerance = 1e3 * 1.4901161193847656e-08;  // 1e3 sqrt(eps)
  constexpr double kBackwardTolerance = 1e3 * kEps;

  mc::GaussianSource source(20240611);
  DrawTally tally;
  for (int draw = 0; draw < kDraws; ++draw) {
    // Entries uniform on (-s, s) with s itself uniform on (0.3, 1.3): radii from well inside to
    // well outside the unit circle.
    const double s = source.Uniform(0.3, 1.3);
    Eigen::Matrix2d a1, a2;
    for (int i = 0; i < 4; ++i) a1(i) = source.Uniform(-s, s);
    for (int i = 0; i < 4; ++i) a2(i) = source.Uniform(-s, s);

    CompanionSpectrum spectrum;
    const double rho = SpectralRadiusOf(a1, a2, &spectrum);
    ASSERT_EQ(spectrum.eigenvalues.size(), 4u);
    const Eigen::VectorXd quartic = CharacteristicQuartic(a1, a2);

    // (1) Schur-Cohn classification.
    if (std::abs(rho - 1.0) <= kBoundaryMargin) {
      ++tally.near_unit;
    } else {
      const bool stable = rho < 1.0;
      ++(stable ? tally.stable : tally.explosive);
      EXPECT_EQ(SchurCohnStable(quartic), stable) << "draw " << draw << " rho " << rho;
    }

    // (2) Roots of the scalar quartic.
    Eigen::PolynomialSolver<double, Eigen::Dynamic> solver(quartic);
    double max_root = 0.0;
    for (Eigen::Index i = 0; i < solver.roots().size(); ++i) {
      max_root = std::max(max_root, std::abs(solver.roots()[i]));
    }
    const double root_gap = std::abs(max_root - rho) / std::max(1.0, rho);
    tally.worst_root_gap = std::max(tally.worst_root_gap, root_gap);
    EXPECT_LE(root_gap, kRootTolerance) << "draw " << draw;

    // (3) Every reported eigenvalue is a root of the matrix polynomial.
    for (const std::complex<double>& lambda : spectrum.eigenvalues) {
      const double backward = BackwardError(a1, a2, lambda);
      tally.worst_backward_error = std::max(tally.worst_backward_error, backward);
      EXPECT_LE(backward, kBackwardTolerance) << "draw " << draw << " lambda " << lambda;
    }

    // (4) Simulated path: decays when rho < 1, explodes when rho > 1, at rate ln(rho).
    if (std::abs(std::log(rho)) > kPathMargin) {
      ++tally.paths_checked;
      const double growth = PathGrowthRate(a1, a2, kPathSteps, &source);
      EXPECT_EQ(growth < 0.0, rho < 1.0) << "draw " << draw << " rho " << rho;
      const double gap = std::abs(growth - std::log(rho));
      tally.worst_growth_gap = std::max(tally.worst_growth_gap, gap);
      EXPECT_LE(gap, kGrowthTolerance) << "draw " << draw << " rho " << rho;
    }
  }
  mc::Report("companion.draws", std::to_string(kDraws));
  mc::Report("companion.stable", std::to_string(tally.stable));
  mc::Report("companion.explosive", std::to_string(tally.explosive));
  mc::Report("companion.near_unit", std::to_string(tally.near_unit));
  mc::Report("companion.paths_checked", std::to_string(tally.paths_checked));
  mc::Report("companion.worst_root_gap", mc::FormatNumber(tally.worst_root_gap, 3));
  mc::Report("companion.worst_backward_error", mc::FormatNumber(tally.worst_backward_error, 3));
  mc::Report("companion.worst_growth_gap", mc::FormatNumber(tally.worst_growth_gap, 3));
  // Both classes must be well represented for the comparison to mean anything.
  EXPECT_GE(tally.stable, kDraws / 10);
  EXPECT_GE(tally.explosive, kDraws / 10);
  EXPECT_GE(tally.paths_checked, kDraws / 2);
}

}  // namespace
}  // namespace rimwatch
