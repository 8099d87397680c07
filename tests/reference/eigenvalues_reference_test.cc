// RealEigenvalues (engine/eigenvalues.h) against numpy.linalg.eigvals, i.e. LAPACK dgeev
// (values written by tests/reference/make_eigenvalues_reference.py): dense Gaussian matrices of
// sizes 1..16, companion matrices of stable and explosive VARs, rotation blocks with known
// complex pairs, and matrices scaled by 1e150 and 1e-150.
//
// Both solvers are backward stable, so each eigenvalue is off by at most about
// eps ||A|| cond(lambda) in either; random matrices of these sizes have eigenvalue condition
// numbers well below 1e3. The check: after matching the two multisets (each reference value to
// the nearest unused computed one), |lambda - lambda_ref| <= 1e-12 max|a_ij| m, about 4.5e3
// eps relative to the matrix scale. Seen when written: at most 1.3e-15 (companion matrices).
// Missing files fail the test; nothing is skipped.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <cmath>
#include <complex>
#include <fstream>
#include <nlohmann/json.hpp>
#include <string>
#include <vector>

#include "reference_compare.h"
#include "reference_csv.h"
#include "rimwatch/engine/eigenvalues.h"
#include "unit/eigen_match.h"

namespace rimwatch {
namespace {

using nlohmann::json;

json Load() {
  std::string dir, why;
  if (!refdata::ReferenceDir(&dir, &why)) {
    ADD_FAILURE() << why;
    return json();
  }
  std::ifstream in(dir + "/eigenvalues_reference.json");
  if (!in) {
    ADD_FAILURE() << "cannot open " << dir << "/eigenvalues_reference.json";
    return json();
  }
  return json::parse(in);
}

using testing::MatchedDistance;

TEST(EigenvaluesReference, AgreesWithLapackDgeev) {
  const json doc = Load();
  ASSERT_TRUE(doc.contains("cases"));
  ASSERT_GE(doc["cases"].size(), 200u);
  for (const json& c : doc["cases"]) {
    const std::string name = c["name"];
    const auto m = static_cast<Eigen::Index>(c["a"].size());
    Eigen::MatrixXd a(m, m);
    for (Eigen::Index i = 0; i < m; ++i) {
      for (Eigen::Index j = 0; j < m; ++j) a(i, j) = c["a"][i][j].get<double>();
    }
    std::vector<std::complex<double>> ref;
    for (std::size_t i = 0; i < c["re"].size(); ++i) {
      ref.emplace_back(c["re"][i].get<double>(), c["im"][i].get<double>());
    }
    Eigen::VectorXcd got;
    ASSERT_TRUE(RealEigenvalues(a, &got)) << name;
    ASSERT_EQ(got.size(), m) << name;
    const double scale = c["scale"].get<double>();
    const double rel = MatchedDistance(ref, got) / (scale * static_cast<double>(m));
    refdata::WorstErrors::Get().Record(std::string("eigenvalue, ") + c["kind"].get<std::string>(),
                                       rel, name);
    EXPECT_LE(rel, 1e-12) << name;
  }
}

}  // namespace
}  // namespace rimwatch
