// Comparing two multisets of complex eigenvalues (the unit and reference tests of
// engine/eigenvalues.h): each expected value is matched to the nearest computed value not yet
// used, and the largest distance is returned (infinity when fewer values were computed).
#pragma once

#include <Eigen/Core>
#include <cmath>
#include <complex>
#include <limits>
#include <vector>

namespace rimwatch::testing {

inline double MatchedDistance(const std::vector<std::complex<double>>& want,
                              const Eigen::VectorXcd& got) {
  std::vector<bool> used(static_cast<std::size_t>(got.size()), false);
  double worst = 0.0;
  for (const std::complex<double>& w : want) {
    double best = std::numeric_limits<double>::infinity();
    Eigen::Index at = -1;
    for (Eigen::Index i = 0; i < got.size(); ++i) {
      if (used[static_cast<std::size_t>(i)]) continue;
      const double d = std::abs(got[i] - w);
      if (d < best) {
        best = d;
        at = i;
      }
    }
    if (at < 0) return std::numeric_limits<double>::infinity();
    used[static_cast<std::size_t>(at)] = true;
    worst = std::max(worst, best);
  }
  return worst;
}

inline double MatchedDistance(const Eigen::VectorXcd& want, const Eigen::VectorXcd& got) {
  return MatchedDistance(std::vector<std::complex<double>>(want.begin(), want.end()), got);
}

}  // namespace rimwatch::testing
