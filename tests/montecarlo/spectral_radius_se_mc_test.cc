// Delta-method standard error of the spectral radius, by simulation, and its gradient against
// central finite differences.
//
// Law: the LS estimator of a stable VAR is asymptotically normal, sqrt(T) (theta_hat - theta) ->
// N(0, Omega (x) Gamma^{-1}) (Luetkepohl 2005, "New Introduction to Multiple Time Series Analysis",
// Prop. 3.1), so a differentiable function rho(theta) is asymptotically normal with variance
// g' V g, g = d rho / d theta (the delta method, Luetkepohl 2005, Prop. 3.6 for functions of VAR
// coefficients; numbering from memory). The spectral radius is differentiable where the top
// eigenvalue is simple, with d lambda = u^H dF v / (u^H v) (Magnus & Neudecker 1999, "Matrix
// Differential Calculus", Ch. 8). Expected: the mean reported SE is close to the Monte Carlo
// standard deviation of rho_hat, and rho_hat +- 1.96 SE covers the true rho about 95% of the time.
#include <gtest/gtest.h>

#include <Eigen/Dense>
#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>
#include <numeric>
#include <string>
#include <vector>

#include "mc_support.h"
#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/var_fit.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

VarSpec MakeSpec(int n, int lags, Deterministic deterministic) {
  VarSpec spec;
  spec.variables = {"alpha", "beta", "gamma"};
  spec.variables.resize(n);
  spec.lags = lags;
  spec.deterministic = deterministic;
  return spec;
}

double SpectralRadius(const VarSpec& spec, const Eigen::MatrixXd& phi) {
  CompanionSpectrum spectrum;
  const Status st = ComputeCompanionSpectrum(spec, phi, /*with_gradient=*/false, &spectrum);
  EXPECT_TRUE(st.ok()) << st.ToString();
  return spectrum.spectral_radius;
}

// Central differences of rho over every entry theta[a k + j] = Phi(a, j): error O(h^2 rho''') +
// O(eps / h). With h = 1e-5 both stay far below the 1e-6 tolerance.
void ExpectGradientMatchesCentralDifferences(const VarSpec& spec, const Eigen::MatrixXd& phi,
                                             bool complex_top) {
  constexpr double kStep = 1e-5;
  constexpr double kRelativeTolerance = 1e-6;
  CompanionSpectrum spectrum;
  ASSERT_TRUE(ComputeCompanionSpectrum(spec, phi, /*with_gradient=*/true, &spectrum).ok());
  ASSERT_TRUE(spectrum.gradient_status.ok()) << spectrum.gradient_status.ToString();
  // The case must be the kind it claims to be.
  EXPECT_EQ(spectrum.eigenvalues[0].imag() != 0.0, complex_top);
  const int n = spec.n();
  const int k = spec.k();
  ASSERT_EQ(spectrum.gradient.size(), n * k);
  const double scale = std::max(1.0, spectrum.gradient.cwiseAbs().maxCoeff());
  for (int a = 0; a < n; ++a) {
    for (int j = 0; j < k; ++j) {
      Eigen::MatrixXd up = phi, down = phi;
      up(a, j) += kStep;
      down(a, j) -= kStep;
      const double fd = (SpectralRadius(spec, up) - SpectralRadius(spec, down)) / (2.0 * kStep);
      EXPECT_NEAR(spectrum.gradient[a * k + j], fd, kRelativeTolerance * scale)
          << "equation " << a << " regressor " << spec.RegressorName(j);
    }
  }
  // Deterministic terms do not enter F: their entries are exactly zero.
  for (int a = 0; a < n; ++a) {
    for (int j = 0; j < spec.num_deterministic(); ++j) EXPECT_EQ(spectrum.gradient[a * k + j], 0.0);
  }
}

TEST(SpectralRadiusGradient, RealTopEigenvalueVar2) {
  const VarSpec spec = MakeSpec(2, 2, Deterministic::kConstant);
  Eigen::MatrixXd phi(2, 5);
  phi << 0.3, 0.6, 0.2, 0.16, -0.1,  //
      -0.2, 0.15, 0.8, 0.05, -0.15;
  ExpectGradientMatchesCentralDifferences(spec, phi, /*complex_top=*/false);
}

TEST(SpectralRadiusGradient, ComplexTopPairVar2) {
  // A1 = 0.9 [cos 0.5, -sin 0.5; sin 0.5, cos 0.5] plus small terms: a complex top pair.
  const VarSpec spec = MakeSpec(2, 2, Deterministic::kConstant);
  Eigen::MatrixXd phi(2, 5);
  phi << 1.0, 0.9 * std::cos(0.5), -0.9 * std::sin(0.5), 0.05, 0.02,  //
      0.5, 0.9 * std::sin(0.5), 0.9 * std::cos(0.5), -0.03, 0.04;
  ExpectGradientMatchesCentralDifferences(spec, phi, /*complex_top=*/true);
}

TEST(SpectralRadiusGradient, TrivariateVar1WithTrend) {
  const VarSpec spec = MakeSpec(3, 1, Deterministic::kTrend);
  Eigen::MatrixXd phi(3, 5);
  phi << 0.1, 0.01, 0.7, 0.2, -0.1,  //
      0.2, -0.02, 0.1, 0.4, 0.3,     //
      -0.3, 0.03, 0.05, -0.2, 0.1;
  ExpectGradientMatchesCentralDifferences(spec, phi, /*complex_top=*/false);
}

// Monte Carlo design: a VAR(2) whose matrix polynomial is upper triangular, so
//   det(lambda^2 I - lambda A1 - A2) = (lambda^2 - 0.6 lambda - 0.16)(lambda^2 - 0.8 lambda + 0.15)
//                                    = (lambda - 0.8)(lambda + 0.2)(lambda - 0.5)(lambda - 0.3):
// the top eigenvalue 0.8 is real and simple, the next modulus is 0.5.
constexpr double kTrueRho = 0.8;
constexpr int kReplications = 1000;
constexpr int kRows = 400;  // estimation rows T
constexpr int kBurnIn = 200;

struct RhoDraws {
  std::vector<double> rho;
  std::vector<double> se;
};

std::vector<Eigen::MatrixXd> DesignLagMatrices() {
  Eigen::MatrixXd a1(2, 2), a2(2, 2);
  a1 << 0.6, 0.2, 0.0, 0.8;
  a2 << 0.16, -0.1, 0.0, -0.15;
  return {a1, a2};
}

RhoDraws SimulateRho() {
  const std::vector<Eigen::MatrixXd> a = DesignLagMatrices();
  const Eigen::VectorXd c = Eigen::Vector2d(1.0, 0.5);
  Eigen::Matrix2d sigma;
  sigma << 1.0, 0.4, 0.4, 0.5;
  const Eigen::Matrix2d chol = sigma.llt().matrixL();
  auto error_law = [&](const Eigen::MatrixXd&, mc::GaussianSource* source) {
    return Eigen::VectorXd(chol * source->NormalVector(2));
  };
  FitOptions options;
  options.lags = 2;
  options.deterministic = Deterministic::kConstant;
  options.covariance.kind = CovarianceKind::kClassical;
  mc::GaussianSource source(20240003ULL);
  RhoDraws draws;
  for (int rep = 0; rep < kReplications; ++rep) {
    const Eigen::MatrixXd y =
        mc::SimulateVar(a, c, kBurnIn, kRows + options.lags, &source, error_law);
    FitReport report;
    const Status st = FitVar(y, {"alpha", "beta"}, options, &report);
    EXPECT_TRUE(st.ok()) << st.ToString();
    EXPECT_EQ(report.rows, kRows);
    EXPECT_TRUE(report.spectral_radius_se_status.ok())
        << "replication " << rep << ": " << report.spectral_radius_se_status.ToString();
    draws.rho.push_back(report.spectral_radius);
    draws.se.push_back(report.spectral_radius_se);
  }
  return draws;
}

TEST(SpectralRadiusSe, TrueDesignHasRadiusPointEight) {
  const std::vector<Eigen::MatrixXd> a = DesignLagMatrices();
  Eigen::MatrixXd phi(2, 5);
  phi << Eigen::Vector2d(1.0, 0.5), a[0], a[1];
  EXPECT_NEAR(SpectralRadius(MakeSpec(2, 2, Deterministic::kConstant), phi), kTrueRho, 16 * kEps);
}

TEST(SpectralRadiusSe, ClassicalDeltaMethodMatchesMonteCarloSpread) {
  // Tolerances from the task: the mean SE within 15% of the Monte Carlo s.d., coverage in
  // [92%, 97.5%] (nominal 95%; the O(1/T) downward bias of rho_hat costs about a point).
  constexpr double kSeRatioTolerance = 0.15;
  constexpr double kCoverageLow = 0.92;
  constexpr double kCoverageHigh = 0.975;
  constexpr double kNormal975 = 1.959963984540054;  // Phi^{-1}(0.975)
  const RhoDraws draws = SimulateRho();
  const double n = static_cast<double>(draws.rho.size());
  const double mean_rho = std::accumulate(draws.rho.begin(), draws.rho.end(), 0.0) / n;
  double ss = 0.0;
  for (double r : draws.rho) ss += (r - mean_rho) * (r - mean_rho);
  const double mc_sd = std::sqrt(ss / (n - 1.0));
  const double mean_se = std::accumulate(draws.se.begin(), draws.se.end(), 0.0) / n;
  int covered = 0;
  for (std::size_t i = 0; i < draws.rho.size(); ++i) {
    covered += std::abs(draws.rho[i] - kTrueRho) <= kNormal975 * draws.se[i] ? 1 : 0;
  }
  const mc::BinomialShare coverage = mc::ShareWithInterval(covered, static_cast<int>(n));
  const double ratio = mean_se / mc_sd;
  mc::Report("rho.mean_estimate", mc::FormatNumber(mean_rho, 5));
  mc::Report("rho.bias", mc::FormatNumber(mean_rho - kTrueRho, 3));
  mc::Report("rho.monte_carlo_sd", mc::FormatNumber(mc_sd, 5));
  mc::Report("rho.mean_reported_se", mc::FormatNumber(mean_se, 5));
  // For information: the SE is right-skewed (large when the estimated top two moduli come close).
  std::vector<double> sorted_se = draws.se;
  std::nth_element(sorted_se.begin(), sorted_se.begin() + sorted_se.size() / 2, sorted_se.end());
  mc::Report("rho.median_reported_se", mc::FormatNumber(sorted_se[sorted_se.size() / 2], 5));
  mc::Report("rho.se_ratio", mc::FormatNumber(ratio, 4));
  mc::Report("rho.coverage_95", mc::FormatShare(coverage));
  EXPECT_NEAR(ratio, 1.0, kSeRatioTolerance);
  EXPECT_GE(coverage.rate, kCoverageLow);
  EXPECT_LE(coverage.rate, kCoverageHigh);
}

}  // namespace
}  // namespace rimwatch
