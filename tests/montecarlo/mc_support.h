// Shared pieces of the Monte Carlo tests: a reproducible Gaussian source, a VAR simulator, binomial
// intervals and acceptance bands, and a reporter that writes figures to the CI log.
//
// Reproducibility: std::mt19937_64 is specified bit for bit by the standard, but the standard
// distributions are not, so uniforms and normals are drawn here by hand (53-bit uniforms and the
// Box-Muller transform, Box & Muller 1958, "A note on the generation of random normal deviates",
// Ann. Math. Statist. 29). A fixed seed then gives the same draws with any standard library.
#pragma once

#include <gtest/gtest.h>

#include <Eigen/Core>
#include <boost/math/distributions/binomial.hpp>
#include <cmath>
#include <cstdint>
#include <iomanip>
#include <iostream>
#include <numbers>
#include <random>
#include <sstream>
#include <string>
#include <vector>

namespace rimwatch::mc {

class GaussianSource {
 public:
  explicit GaussianSource(std::uint64_t seed) : engine_(seed) {}

  // Uniform on the open interval (0, 1): the top 53 bits, shifted by half a step.
  double Uniform() {
    constexpr double kStep = 1.0 / 9007199254740992.0;  // 2^-53
    return (static_cast<double>(engine_() >> 11) + 0.5) * kStep;
  }
  // Uniform on (lo, hi).
  double Uniform(double lo, double hi) { return lo + (hi - lo) * Uniform(); }

  // Standard normal: z1 = sqrt(-2 ln u1) cos(2 pi u2), z2 = sqrt(-2 ln u1) sin(2 pi u2).
  double Normal() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    const double radius = std::sqrt(-2.0 * std::log(Uniform()));
    const double angle = 2.0 * std::numbers::pi * Uniform();
    spare_ = radius * std::sin(angle);
    has_spare_ = true;
    return radius * std::cos(angle);
  }

  Eigen::VectorXd NormalVector(int n) {
    Eigen::VectorXd z(n);
    for (int i = 0; i < n; ++i) z[i] = Normal();
    return z;
  }

 private:
  std::mt19937_64 engine_;
  bool has_spare_ = false;
  double spare_ = 0.0;
};

// Simulates y_t = c + A_1 y_{t-1} + ... + A_p y_{t-p} + e_t from a zero presample, discards
// `burn_in` observations and returns the next `rows` observations (rows x n, oldest first).
// draw_error(history, source) returns e_t; history is n x p with column j = y_{t-1-j}, so an error
// law may depend on the past (conditional heteroskedasticity).
template <typename ErrorLaw>
Eigen::MatrixXd SimulateVar(const std::vector<Eigen::MatrixXd>& a, const Eigen::VectorXd& c,
                            int burn_in, int rows, GaussianSource* source, ErrorLaw draw_error) {
  const int n = static_cast<int>(c.size());
  const int p = static_cast<int>(a.size());
  Eigen::MatrixXd history = Eigen::MatrixXd::Zero(n, p);
  Eigen::MatrixXd out(rows, n);
  for (int t = 0; t < burn_in + rows; ++t) {
    Eigen::VectorXd y = c + draw_error(history, source);
    for (int j = 0; j < p; ++j) y += a[j] * history.col(j);
    for (int j = p - 1; j > 0; --j) history.col(j) = history.col(j - 1);
    history.col(0) = y;
    if (t >= burn_in) out.row(t - burn_in) = y.transpose();
  }
  return out;
}

// A share of `trials` Bernoulli outcomes with an exact (Clopper-Pearson) interval.
// Source: Clopper & Pearson 1934, "The use of confidence or fiducial limits illustrated in the
// case of the binomial", Biometrika 26; computed by Boost.Math's binomial_distribution.
struct BinomialShare {
  int count = 0;
  int trials = 0;
  double rate = 0.0;
  double lower = 0.0;
  double upper = 1.0;
  double confidence = 0.95;
};

inline BinomialShare ShareWithInterval(int count, int trials, double confidence = 0.95) {
  using Binomial = boost::math::binomial_distribution<double>;
  BinomialShare s;
  s.count = count;
  s.trials = trials;
  s.rate = static_cast<double>(count) / trials;
  s.confidence = confidence;
  const double tail = 0.5 * (1.0 - confidence);
  s.lower = Binomial::find_lower_bound_on_p(trials, count, tail);
  s.upper = Binomial::find_upper_bound_on_p(trials, count, tail);
  return s;
}

// Acceptance band for a share under H0 (true probability p): the count lies in [lo, hi] with
// probability at least `coverage`, from the Binomial(trials, p) quantiles rounded outwards
// (common practice). Returned as shares.
struct ShareBand {
  double lower = 0.0;
  double upper = 1.0;
};

inline ShareBand BinomialBand(int trials, double p, double coverage) {
  const boost::math::binomial_distribution<double> binomial(trials, p);
  const double tail = 0.5 * (1.0 - coverage);
  ShareBand band;
  band.lower = boost::math::quantile(binomial, tail) / trials;
  band.upper = boost::math::quantile(boost::math::complement(binomial, tail)) / trials;
  return band;
}

// Writes "name = value" to stdout (the CI log) and to the test's XML properties.
inline void Report(const std::string& name, const std::string& value) {
  std::cout << "[montecarlo] " << name << " = " << value << std::endl;
  ::testing::Test::RecordProperty(name, value);
}

inline std::string FormatShare(const BinomialShare& s) {
  std::ostringstream text;
  text << std::fixed << std::setprecision(2) << 100.0 * s.rate << "% (" << s.count << "/"
       << s.trials << "; " << std::setprecision(0) << 100.0 * s.confidence << "% Clopper-Pearson "
       << std::setprecision(2) << 100.0 * s.lower << "%.." << 100.0 * s.upper << "%)";
  return text.str();
}

inline std::string FormatNumber(double x, int digits = 5) {
  std::ostringstream text;
  text << std::setprecision(digits) << x;
  return text.str();
}

}  // namespace rimwatch::mc
