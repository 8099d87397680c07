#include "demo_scenario.h"

#include <Eigen/Cholesky>
#include <Eigen/Core>
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <sstream>
#include <tuple>

#include "rimwatch/daemon/period.h"
#include "rimwatch/engine/companion.h"
#include "rimwatch/engine/random.h"
#include "rimwatch/engine/var_spec.h"

namespace rimwatch::cli {
namespace {

constexpr std::uint64_t kDeskSeed = 20261202;
constexpr std::uint64_t kNowcastSeed = 20010131;
constexpr int kBurnIn = 500;  // simulated and discarded before bar 1 (and month 1)

// ---- the desk's coefficients (n = 3, columns alder, birch, cedar) -----------------------------

const Eigen::Vector3d kDeskConstant(0.002, -0.001, 0.0015);

Eigen::Matrix3d DeskLag(bool persistent, int lag) {
  Eigen::Matrix3d a;
  if (!persistent) {
    if (lag == 1) {
      a << 0.35, 0.00, 0.15,  //
          0.20, 0.30, 0.05,   //
          0.10, 0.25, 0.30;
    } else {
      a << -0.20, 0.00, 0.10,  //
          0.10, -0.15, 0.00,   //
          0.00, 0.15, -0.20;
    }
  } else {
    if (lag == 1) {
      a << 0.52, 0.28, 0.09,  //
          0.14, 0.66, 0.05,   //
          0.05, 0.19, 0.56;
    } else {
      a << 0.05, 0.00, 0.05,  //
          0.05, 0.09, 0.00,   //
          0.00, 0.05, 0.00;
    }
  }
  return a;
}

// Residual covariance (percent^2): standard deviations 0.06, 0.08, 0.05, correlations 0.3..0.5.
Eigen::Matrix3d DeskOmega() {
  const Eigen::Vector3d sd(0.06, 0.08, 0.05);
  Eigen::Matrix3d corr;
  corr << 1.0, 0.4, 0.3,  //
      0.4, 1.0, 0.5,      //
      0.3, 0.5, 1.0;
  return sd.asDiagonal() * corr * sd.asDiagonal();
}

// ---- the economy's growth VAR (n = 4: output, orders, prices, hours; percent per month) -------

const Eigen::Vector4d kGrowthMean(0.15, 0.20, 0.18, 0.05);

Eigen::Matrix4d GrowthLag(int lag) {
  Eigen::Matrix4d a;
  if (lag == 1) {
    a << 0.30, 0.25, 0.00, 0.10,  //
        0.05, 0.40, 0.00, 0.05,   //
        0.05, 0.05, 0.50, 0.05,   //
        0.20, 0.15, 0.00, 0.30;
  } else {
    a << 0.10, 0.00, 0.00, 0.00,  //
        0.00, 0.10, 0.00, 0.00,   //
        0.00, 0.00, 0.15, 0.00,   //
        0.05, 0.00, 0.00, 0.05;
  }
  return a;
}

Eigen::Matrix4d GrowthOmega() {
  const Eigen::Vector4d sd(0.60, 1.20, 0.25, 0.40);
  Eigen::Matrix4d corr;
  corr << 1.0, 0.5, 0.1, 0.4,  //
      0.5, 1.0, 0.1, 0.3,      //
      0.1, 0.1, 1.0, 0.0,      //
      0.4, 0.3, 0.0, 1.0;
  return sd.asDiagonal() * corr * sd.asDiagonal();
}

std::string FormatNumber(double v) {
  char buf[32];
  std::snprintf(buf, sizeof buf, "%.17g", v);
  return buf;
}

std::string MonthText(int month_index) {  // 0 = 2001-01
  char buf[16];
  std::snprintf(buf, sizeof buf, "%04d-%02d-01", 2001 + month_index / 12, 1 + month_index % 12);
  return buf;
}

// 08:30 UTC on `day` of the month after reference month `month_index`, plus `extra` months.
std::string ReleaseText(int month_index, int extra, int day) {
  const int m = month_index + 1 + extra;
  char buf[32];
  std::snprintf(buf, sizeof buf, "%04d-%02d-%02dT08:30:00Z", 2001 + m / 12, 1 + m % 12, day);
  return buf;
}

constexpr const char* kDeskSpec =
    R"(# The market-desk model of `rimwatch demo` (invented series; see the demo's output).
name = "desk"
variables = ["alder", "birch", "cedar"]
lags = 2
deterministic = "constant"

[window]
kind = "forgetting"
lambda = 0.995                # memory about 200 one-minute bars

[covariance]
kind = "HC3"

[training]
rows = 300                    # the first 300 bars are the reference sample

[stability]
warn = 0.95
critical = 0.99

[[restriction]]
name = "birch-does-not-lead-alder"
granger = { cause = ["birch"], effect = ["alder"] }

[alarms]
false_alarm = 0.05            # per monitor over 10 x 300 bars
horizon = 10
hysteresis = 30               # bars below the clear level before an alert clears
cooldown = 100                # bars after a clear before the same monitor raises again
)";

constexpr const char* kNowcastSpec =
    R"(# The nowcasting model of `rimwatch demo` (an invented economy; see the demo's output).
name = "nowcast"
variables = ["output", "orders", "prices", "hours"]
lags = 2
deterministic = "constant"
transform = { output = "logdiff", orders = "logdiff", prices = "logdiff", hours = "logdiff" }

[window]
kind = "sliding"
rows = 120                    # ten years of months

[covariance]
kind = "HC3"

[training]
rows = 96

[[restriction]]
name = "prices-do-not-lead-output"
granger = { cause = ["prices"], effect = ["output"] }

[alarms]
false_alarm = 0.05
horizon = 10
)";

}  // namespace

Eigen::MatrixXd DeskCoefficients(bool persistent) {
  Eigen::MatrixXd phi(3, 7);
  phi.col(0) = kDeskConstant;
  phi.middleCols(1, 3) = DeskLag(persistent, 1);
  phi.middleCols(4, 3) = DeskLag(persistent, 2);
  return phi;
}

Eigen::MatrixXd DeskErrorCovariance() { return DeskOmega(); }

double DeskSpectralRadius(bool persistent) {
  VarSpec spec;
  spec.variables = {"alder", "birch", "cedar"};
  spec.lags = 2;
  spec.deterministic = Deterministic::kConstant;
  CompanionSpectrum spectrum;
  if (!ComputeCompanionSpectrum(spec, DeskCoefficients(persistent), false, &spectrum).ok()) {
    return std::nan("");
  }
  return spectrum.spectral_radius;
}

DeskScenario MakeDeskScenario() {
  DeskScenario desk;
  desk.names = {"alder", "birch", "cedar"};
  desk.restriction = "birch-does-not-lead-alder";
  desk.spec_toml = kDeskSpec;
  DeterministicRandom random(kDeskSeed);
  const Eigen::Matrix3d chol = DeskOmega().llt().matrixL();
  Eigen::Vector3d y1 = Eigen::Vector3d::Zero(), y2 = Eigen::Vector3d::Zero();

  daemon::Period start;
  (void)daemon::ParsePeriod("2026-03-02T00:00:00Z", &start);
  constexpr std::int64_t kMinuteUs = 60'000'000;
  for (int t = 1 - kBurnIn; t <= kDeskBars; ++t) {
    const bool persistent = t >= kDeskDynamicsBreak;
    const double scale = t >= kDeskVarianceBreak ? std::sqrt(2.0) : 1.0;
    Eigen::Vector3d z;
    for (int i = 0; i < 3; ++i) z(i) = random.Normal();
    const Eigen::Vector3d y = kDeskConstant + DeskLag(persistent, 1) * y1 +
                              DeskLag(persistent, 2) * y2 + scale * (chol * z);
    y2 = y1;
    y1 = y;
    if (t < 1) continue;
    desk.periods.push_back(
        daemon::FormatPeriod(daemon::PeriodKind::kTimestamp, start.key + (t - 1) * kMinuteUs));
    desk.values.push_back({y(0), y(1), y(2)});
  }
  const double rho_calm = DeskSpectralRadius(false), rho_persistent = DeskSpectralRadius(true);
  char change[200];
  std::snprintf(change, sizeof change,
                "dynamics shift: spectral radius %.2f -> %.2f, and birch starts leading alder",
                rho_calm, rho_persistent);
  desk.breaks.push_back({"desk", kDeskDynamicsBreak, desk.periods[kDeskDynamicsBreak - 1], change});
  desk.breaks.push_back({"desk", kDeskVarianceBreak, desk.periods[kDeskVarianceBreak - 1],
                         "the error variance of every series doubles"});
  return desk;
}

NowcastScenario MakeNowcastScenario() {
  NowcastScenario now;
  now.names = {"output", "orders", "prices", "hours"};
  now.months = kNowcastMonths;
  now.spec_toml = kNowcastSpec;
  DeterministicRandom random(kNowcastSeed);
  const Eigen::Matrix4d chol = GrowthOmega().llt().matrixL();
  const Eigen::Matrix4d a1 = GrowthLag(1), a2 = GrowthLag(2);
  const Eigen::Vector4d constant =
      (Eigen::Matrix4d::Identity() - a1 - a2) * kGrowthMean;  // E g = kGrowthMean
  Eigen::Vector4d g1 = kGrowthMean, g2 = kGrowthMean;
  Eigen::Vector4d level(100.0, 100.0, 100.0, 100.0);

  // Release day of each series in the month after the reference month (see the header).
  const int day[4] = {15, 8, 20, 3};
  // (released_at, series index, month) sorts releases by time, ties by series and month.
  std::vector<std::tuple<std::string, int, int, Release>> list;
  for (int t = 1 - kBurnIn; t <= kNowcastMonths; ++t) {
    Eigen::Vector4d z;
    for (int i = 0; i < 4; ++i) z(i) = random.Normal();
    const Eigen::Vector4d g = constant + a1 * g1 + a2 * g2 + chol * z;
    g2 = g1;
    g1 = g;
    level = (level.array() * (g.array() / 100.0).exp()).matrix();
    if (t < 1) continue;
    const int month = t - 1;
    for (int s = 0; s < 4; ++s) {
      // The first release misses the final figure by a measurement error of 0.2 percent for
      // output and 0.4 percent for orders in the months that are revised; the revision brings
      // the final figure. Series and months without a revision are final at once.
      const bool revised = (s == 0 && month % 3 == 0) || (s == 1 && month % 4 == 0);
      const double final_value = level(s);
      double first = final_value;
      if (revised) first = final_value * std::exp((s == 0 ? 0.002 : 0.004) * random.Normal());
      Release r{now.names[s], MonthText(month), first, ReleaseText(month, 0, day[s]), false};
      list.emplace_back(r.released_at, s, month, r);
      if (revised) {
        Release v{now.names[s], MonthText(month), final_value, ReleaseText(month, 1, day[s]), true};
        list.emplace_back(v.released_at, s, month, v);
        ++now.revisions;
      }
    }
  }
  std::sort(list.begin(), list.end(), [](const auto& a, const auto& b) {
    return std::tie(std::get<0>(a), std::get<1>(a), std::get<2>(a)) <
           std::tie(std::get<0>(b), std::get<1>(b), std::get<2>(b));
  });
  for (auto& item : list) now.releases.push_back(std::move(std::get<3>(item)));
  return now;
}

std::string DeskCsv(const DeskScenario& desk) {
  std::ostringstream out;
  out << "period";
  for (const auto& n : desk.names) out << ',' << n;
  out << '\n';
  for (std::size_t t = 0; t < desk.periods.size(); ++t) {
    out << desk.periods[t];
    for (double v : desk.values[t]) out << ',' << FormatNumber(v);
    out << '\n';
  }
  return out.str();
}

std::string NowcastCsv(const NowcastScenario& nowcast) {
  std::ostringstream out;
  out << "series,period,value,released_at\n";
  for (const Release& r : nowcast.releases) {
    out << r.series << ',' << r.period << ',' << FormatNumber(r.value) << ',' << r.released_at
        << '\n';
  }
  return out.str();
}

}  // namespace rimwatch::cli
