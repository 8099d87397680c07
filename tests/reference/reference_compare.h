// Comparison with reference values for the tests under tests/reference: a relative check that
// also records the worst relative error per quantity, printed when the test binary ends.
#pragma once

#include <gtest/gtest.h>

#include <algorithm>
#include <cmath>
#include <cstdio>
#include <map>
#include <string>
#include <utility>

namespace rimwatch::refdata {

class WorstErrors {
 public:
  static WorstErrors& Get() {
    static WorstErrors worst;
    return worst;
  }
  void Record(const std::string& quantity, double rel, const std::string& where) {
    auto it = worst_.find(quantity);
    if (it == worst_.end() || !(rel <= it->second.first)) worst_[quantity] = {rel, where};
  }
  void Print() const {
    std::printf("\nworst relative error per quantity (all cases):\n");
    for (const auto& [quantity, entry] : worst_) {
      std::printf("  %-36s %10.3e  at %s\n", quantity.c_str(), entry.first, entry.second.c_str());
    }
  }

 private:
  std::map<std::string, std::pair<double, std::string>> worst_;
};

class PrintWorstErrors : public ::testing::Environment {
 public:
  void TearDown() override { WorstErrors::Get().Print(); }
};
inline ::testing::Environment* const kPrintWorst =
    ::testing::AddGlobalTestEnvironment(new PrintWorstErrors);

// |got - want| <= tol * max(1e-300, |want|): relative to the reference value itself.
inline void ExpectRel(const std::string& quantity, const std::string& where, double got,
                      double want, double tol) {
  const double scale = std::max(1e-300, std::abs(want));
  const double err = std::abs(got - want);
  WorstErrors::Get().Record(quantity, err / scale, where);
  EXPECT_LE(err, tol * scale) << quantity << " " << where << ": engine " << got << " vs reference "
                              << want << " (rel " << err / scale << ")";
}

}  // namespace rimwatch::refdata
