// The published worked example: Luetkepohl, H. (2005), New Introduction to Multiple Time Series
// Analysis, Springer, Sec. 3.2.3. West German fixed investment, disposable income and
// consumption (data set e1), first differences of logs 1960Q2-1978Q4 (75 rows), VAR(2) with a
// constant: 73 estimation rows. The data come from e1.csv written by make_reference.py.
//
// The printed values below are typed from memory, confirmed with statsmodels 0.13.5 (VAR.fit on
// the same rows). Each estimate must round to the printed value: |estimate - printed| is at
// most half a unit in the last printed decimal.
#include <gtest/gtest.h>

#include <Eigen/Core>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "reference_csv.h"
#include "rimwatch/engine/var_fit.h"

namespace rimwatch {
namespace {

constexpr double kEps = std::numeric_limits<double>::epsilon();

// Half a unit in the last printed decimal, plus a few eps for the binary representation of the
// printed decimal itself.
double RoundingBound(int decimals, double printed) {
  return 0.5 * std::pow(10.0, -decimals) + 4.0 * kEps * std::abs(printed);
}

void ExpectRoundsTo(const std::string& what, double estimate, double printed, int decimals) {
  EXPECT_LE(std::abs(estimate - printed), RoundingBound(decimals, printed))
      << what << ": estimate " << estimate << " does not round to the printed " << printed;
}

class LuetkepohlE1 : public ::testing::Test {
 protected:
  void SetUp() override {
    std::string dir, why;
    ASSERT_TRUE(refdata::ReferenceDir(&dir, &why)) << why;
    refdata::ReferenceCsv data;
    ASSERT_TRUE(refdata::ReadReferenceCsv(dir + "/e1.csv", &data, &why)) << why;
    ASSERT_EQ(data.variables, (std::vector<std::string>{"invest", "income", "cons"}));
    ASSERT_EQ(data.values.rows(), 75);
    ASSERT_EQ(data.periods.front(), "1960Q2");
    ASSERT_EQ(data.periods.back(), "1978Q4");
    FitOptions options;
    options.lags = 2;
    options.deterministic = Deterministic::kConstant;
    options.covariance.kind = CovarianceKind::kClassical;
    const Status st = FitVar(data.values, data.variables, options, &fit_);
    ASSERT_TRUE(st.ok()) << st.ToString();
    ASSERT_EQ(fit_.rows, 73);  // Luetkepohl 2005, Sec. 3.2.3: T = 73
  }

  FitReport fit_;
};

// Regressor columns: const, L1.invest, L1.income, L1.cons, L2.invest, L2.income, L2.cons.
TEST_F(LuetkepohlE1, InterceptVector) {
  // nu = (-0.017, 0.016, 0.013)'; Luetkepohl 2005, Sec. 3.2.3 (from memory, confirmed with
  // statsmodels 0.13.5).
  const double printed[] = {-0.017, 0.016, 0.013};
  for (int eq = 0; eq < 3; ++eq) {
    ExpectRoundsTo("nu[" + std::to_string(eq) + "]", fit_.phi(eq, 0), printed[eq], 3);
  }
}

TEST_F(LuetkepohlE1, FirstRowsOfA1AndA2) {
  // Investment equation: A1 row 1 = (-0.320, 0.146, 0.961), A2 row 1 = (-0.161, 0.115, 0.934);
  // Luetkepohl 2005, Sec. 3.2.3 (from memory, confirmed with statsmodels 0.13.5).
  const double a1[] = {-0.320, 0.146, 0.961};
  const double a2[] = {-0.161, 0.115, 0.934};
  for (int j = 0; j < 3; ++j) {
    ExpectRoundsTo("A1[0," + std::to_string(j) + "]", fit_.phi(0, 1 + j), a1[j], 3);
    ExpectRoundsTo("A2[0," + std::to_string(j) + "]", fit_.phi(0, 4 + j), a2[j], 3);
  }
}

TEST_F(LuetkepohlE1, ResidualCovarianceDiagonal) {
  // Sigma_u x 1e4 diagonal = (21.30, 1.37, 0.89), divisor T - k = 73 - 7; Luetkepohl 2005,
  // Sec. 3.2.3 (from memory, confirmed with statsmodels 0.13.5 sigma_u).
  const double printed[] = {21.30, 1.37, 0.89};
  for (int i = 0; i < 3; ++i) {
    ExpectRoundsTo("Sigma_u(" + std::to_string(i) + "," + std::to_string(i) + ") x 1e4",
                   fit_.sigma(i, i) * 1e4, printed[i], 2);
  }
}

}  // namespace
}  // namespace rimwatch
