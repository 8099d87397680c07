// RealEigenvalues (engine/eigenvalues.h): constructed answers, invariants, and agreement with
// Eigen's general solver (EigenSolver: real Schur form, Eigen 3.4) on many random matrices.
// The LAPACK comparison is tests/reference/eigenvalues_reference_test.cc.
#include "rimwatch/engine/eigenvalues.h"

#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <Eigen/Eigenvalues>
#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <vector>

#include "rimwatch/engine/random.h"
#include "unit/eigen_match.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

using testing::MatchedDistance;

Eigen::MatrixXd Gaussian(int m, DeterministicRandom* rng) {
  Eigen::MatrixXd a(m, m);
  for (int i = 0; i < m; ++i) {
    for (int j = 0; j < m; ++j) a(i, j) = rng->Normal();
  }
  return a;
}

TEST(RealEigenvalues, TriangularMatrixGivesItsDiagonal) {
  Eigen::MatrixXd a(4, 4);
  a << 3, 1, 4, 1, 0, -2, 7, 1, 0, 0, 0.5, 8, 0, 0, 0, 9;
  Eigen::VectorXcd got;
  ASSERT_TRUE(RealEigenvalues(a, &got));
  Eigen::VectorXcd want(4);
  want << 3.0, -2.0, 0.5, 9.0;
  EXPECT_LE(MatchedDistance(want, got), 8 * kEps * 9.0);
}

TEST(RealEigenvalues, RotationGivesAConjugatePair) {
  const double th = 0.7, r = 0.9;
  Eigen::MatrixXd a(2, 2);
  a << r * std::cos(th), -r * std::sin(th), r * std::sin(th), r * std::cos(th);
  Eigen::VectorXcd got;
  ASSERT_TRUE(RealEigenvalues(a, &got));
  Eigen::VectorXcd want(2);
  want << std::polar(r, th), std::polar(r, -th);
  EXPECT_LE(MatchedDistance(want, got), 8 * kEps);
  EXPECT_EQ(got[0], std::conj(got[1]));  // a pair is returned as exact conjugates
}

TEST(RealEigenvalues, ZeroEmptyAndNonFinite) {
  Eigen::VectorXcd got;
  ASSERT_TRUE(RealEigenvalues(Eigen::MatrixXd::Zero(5, 5), &got));
  EXPECT_EQ(got.size(), 5);
  EXPECT_EQ(got.cwiseAbs().maxCoeff(), 0.0);
  ASSERT_TRUE(RealEigenvalues(Eigen::MatrixXd(0, 0), &got));
  EXPECT_EQ(got.size(), 0);
  Eigen::MatrixXd a = Eigen::MatrixXd::Identity(3, 3);
  a(1, 2) = std::nan("");
  EXPECT_FALSE(RealEigenvalues(a, &got));
  a(1, 2) = INFINITY;
  EXPECT_FALSE(RealEigenvalues(a, &got));
}

// A Jordan block J_m(lambda) perturbed by rounding: its eigenvalues move by about eps^(1/m);
// the solver must still converge and return m values near lambda.
TEST(RealEigenvalues, DefectiveJordanBlocksConverge) {
  for (int m = 2; m <= 6; ++m) {
    Eigen::MatrixXd j = 0.8 * Eigen::MatrixXd::Identity(m, m);
    for (int i = 0; i + 1 < m; ++i) j(i, i + 1) = 1.0;
    Eigen::VectorXcd got;
    ASSERT_TRUE(RealEigenvalues(j, &got)) << m;
    for (Eigen::Index i = 0; i < got.size(); ++i) {
      EXPECT_LE(std::abs(got[i] - 0.8), 4.0 * std::pow(kEps, 1.0 / m)) << m;
    }
  }
}

// Similarity invariants: the sum of the eigenvalues is the trace, their product the determinant
// (exact identities; the tolerance is rounding).
TEST(RealEigenvalues, TraceAndDeterminantInvariants) {
  DeterministicRandom rng(11);
  for (int m = 1; m <= 10; ++m) {
    for (int rep = 0; rep < 20; ++rep) {
      const Eigen::MatrixXd a = Gaussian(m, &rng);
      Eigen::VectorXcd got;
      ASSERT_TRUE(RealEigenvalues(a, &got));
      const std::complex<double> sum = got.sum();
      const std::complex<double> prod = got.prod();
      const double scale = a.cwiseAbs().maxCoeff();
      EXPECT_NEAR(sum.real(), a.trace(), 1e3 * kEps * m * scale) << m;
      EXPECT_NEAR(sum.imag(), 0.0, 1e3 * kEps * m * scale) << m;
      const double det = a.determinant();
      const double bound = 1e4 * kEps * std::pow(m * scale, m);
      EXPECT_NEAR(prod.real(), det, bound) << m;
      EXPECT_NEAR(prod.imag(), 0.0, bound) << m;
    }
  }
}

// Eigen's general solver (Hessenberg + real Schur) on random dense and companion-shaped
// matrices up to 24 x 24: the same multiset to 1e-11 of the matrix scale times m.
TEST(RealEigenvalues, AgreesWithEigenSolver) {
  DeterministicRandom rng(2026);
  double worst = 0.0;
  for (int m = 1; m <= 24; ++m) {
    for (int rep = 0; rep < 30; ++rep) {
      Eigen::MatrixXd a = Gaussian(m, &rng);
      if (rep % 2 == 1 && m >= 2) {  // companion shape: n = 1 or 2 rows of coefficients
        const int n = (rep % 4 == 1 || m % 2 == 1) ? 1 : 2;
        a.bottomRows(m - n).setZero();
        a.bottomLeftCorner(m - n, m - n).setIdentity();
        a.topRows(n) *= 0.3;
      }
      Eigen::VectorXcd got;
      ASSERT_TRUE(RealEigenvalues(a, &got)) << m;
      Eigen::EigenSolver<Eigen::MatrixXd> es(a, false);
      ASSERT_EQ(es.info(), Eigen::Success);
      const double rel = MatchedDistance(es.eigenvalues(), got) / (a.cwiseAbs().maxCoeff() * m);
      worst = std::max(worst, rel);
      EXPECT_LE(rel, 1e-11) << "m = " << m << " rep " << rep;
    }
  }
  std::printf("worst distance to Eigen's eigenvalues, relative to max|a| m: %.3g\n", worst);
}

// Shifts from the previous matrix (how a monitor calls it, row after row): on drifting (3, 2)
// and (4, 3) companion matrices the results agree with Eigen's solver as tightly as without
// shifts, with good shifts, with shifts of another sequence, and with unusable ones (a
// non-conjugate complex pair, NaN, the wrong size). The saving in QR steps is a speed matter,
// measured by the engine benchmark, not here.
TEST(RealEigenvalues, ShiftsChangeNothingButRounding) {
  DeterministicRandom rng(77);
  double worst = 0.0;
  for (const auto& [n, p] : {std::pair{3, 2}, std::pair{4, 3}}) {
    const int m = n * p;
    Eigen::MatrixXd a = Eigen::MatrixXd::Zero(m, m);
    a.bottomLeftCorner(m - n, m - n).setIdentity();
    for (int i = 0; i < n; ++i) {
      for (int j = 0; j < m; ++j) a(i, j) = 0.25 * rng.Normal();
    }
    Eigen::VectorXcd previous, stranger(m), garbage(m);
    for (int i = 0; i < m; ++i) stranger[i] = std::complex<double>(0.5 * rng.Normal(), 0.0);
    for (int i = 0; i < m; ++i) garbage[i] = std::complex<double>(rng.Normal(), rng.Normal());
    garbage[0] = std::complex<double>(std::nan(""), 0.0);
    for (int row = 0; row < 400; ++row) {
      for (int i = 0; i < n; ++i) {
        for (int j = 0; j < m; ++j) a(i, j) += 1e-3 * rng.Normal();
      }
      Eigen::EigenSolver<Eigen::MatrixXd> es(a, false);
      ASSERT_EQ(es.info(), Eigen::Success);
      const double yardstick = a.cwiseAbs().maxCoeff() * m;
      Eigen::VectorXcd cold, warm, other, bad, short_shifts;
      ASSERT_TRUE(RealEigenvalues(a, &cold));
      ASSERT_TRUE(RealEigenvalues(a, &warm, previous.size() == m ? &previous : nullptr));
      ASSERT_TRUE(RealEigenvalues(a, &other, &stranger));
      ASSERT_TRUE(RealEigenvalues(a, &bad, &garbage));
      const Eigen::VectorXcd wrong_size = Eigen::VectorXcd::Ones(m - 1);
      ASSERT_TRUE(RealEigenvalues(a, &short_shifts, &wrong_size));
      for (const Eigen::VectorXcd* got : {&cold, &warm, &other, &bad, &short_shifts}) {
        const double rel = MatchedDistance(es.eigenvalues(), *got) / yardstick;
        worst = std::max(worst, rel);
        ASSERT_LE(rel, 1e-12) << "(" << n << ", " << p << ") row " << row;
      }
      EXPECT_EQ(short_shifts, cold);  // ignored: the same computation
      previous = warm;
    }
  }
  std::printf("worst distance to Eigen's eigenvalues with shifts, relative to max|a| m: %.3g\n",
              worst);
}

// Entries near the ends of the double range: scaling keeps them representable.
TEST(RealEigenvalues, ExtremeScales) {
  DeterministicRandom rng(5);
  const Eigen::MatrixXd a = Gaussian(6, &rng);
  Eigen::VectorXcd base;
  ASSERT_TRUE(RealEigenvalues(a, &base));
  for (double s : {1e300, 1e-300, 1e-310}) {
    Eigen::VectorXcd got;
    ASSERT_TRUE(RealEigenvalues(a * s, &got)) << s;
    EXPECT_LE(MatchedDistance(base * s, got) / s, 1e-12 * a.cwiseAbs().maxCoeff()) << s;
  }
}

}  // namespace
}  // namespace rimwatch
