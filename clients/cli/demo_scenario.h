// The two invented scenarios of `rimwatch demo`: data, model specs and where the truth changes.
//
// Market desk ("desk"): three invented one-minute return series alder, birch, cedar (percent),
// simulated from a VAR(2) with a constant,
//     y_t = c + A1(t) y_{t-1} + A2(t) y_{t-2} + e_t,   e_t ~ N(0, s(t) Omega),
// in three regimes:
//   bars 1 .. kDeskDynamicsBreak - 1      A = calm: spectral radius 0.598, birch does not enter
//                                         the alder equation (A1[0,1] = A2[0,1] = 0), s = 1;
//   from bar kDeskDynamicsBreak           A = persistent: spectral radius 0.970, birch leads alder
//                                         (A1[0,1] = 0.28), s = 1;
//   from bar kDeskVarianceBreak           the same A, s = 2 (the error variance doubles).
// The monitored restriction says birch does not lead alder, true before the first break only.
// Periods are timestamps one minute apart from 2026-03-02T00:00:00Z (an imaginary market that
// never closes), in canonical period text (daemon/include/rimwatch/daemon/period.h).
//
// Nowcasting ("nowcast"): four monthly indicators of an invented economy, output, orders, prices
// and hours, as index levels whose monthly log growth follows a stable VAR(2) (spectral radius
// 0.711) with constant mean growth and no break. Each month's values are released one series at
// a time on a calendar (hours on the 3rd of the next month, orders on the 8th, output on the 15th,
// prices on the 20th, 08:30 UTC); every third month's output figure and every fourth month's
// orders figure is revised a month after its first release (with the next month's release).
// The model takes log differences of the levels.
//
// Everything is deterministic (DeterministicRandom, fixed seeds), so the demo prints the same
// alerts on every machine. The numbers describe no market, firm, instrument or economy.
//
// Thread safety: pure functions.
#pragma once

#include <Eigen/Core>
#include <cstdint>
#include <string>
#include <vector>

namespace rimwatch::cli {

inline constexpr int kDeskBars = 3000;
inline constexpr int kDeskDynamicsBreak = 1200;  // first bar of the persistent regime
inline constexpr int kDeskVarianceBreak = 2200;  // first bar with doubled error variance
inline constexpr int kNowcastMonths = 300;       // 2001-01 .. 2025-12

// One known change of a scenario.
struct DemoBreak {
  std::string model;
  int row = 0;         // 1-based bar (desk) or month (nowcast) of the first changed observation
  std::string period;  // its canonical period text
  std::string change;  // one sentence
};

struct DeskScenario {
  std::vector<std::string> names;           // alder, birch, cedar
  std::vector<std::string> periods;         // kDeskBars canonical timestamps
  std::vector<std::vector<double>> values;  // kDeskBars rows of names.size() returns
  std::vector<DemoBreak> breaks;            // the two breaks, in order
  std::string spec_toml;                    // the model spec the demo adds
  std::string restriction;                  // the monitored restriction's name
};

// One published value: a first release or a revision.
struct Release {
  std::string series;
  std::string period;       // canonical date, the first day of the reference month
  double value = 0.0;       // index level
  std::string released_at;  // canonical timestamp
  bool revision = false;
};

struct NowcastScenario {
  std::vector<std::string> names;  // output, orders, prices, hours
  std::vector<Release> releases;   // in release order (released_at ascending)
  int months = 0;
  int revisions = 0;
  std::string spec_toml;
};

DeskScenario MakeDeskScenario();
NowcastScenario MakeNowcastScenario();

// The wide CSV `rimwatch feed` and `rimwatch replay` read: period,alder,birch,cedar.
std::string DeskCsv(const DeskScenario& desk);
// The long CSV of `rimwatch feed --series`: series,period,value,released_at in release order.
std::string NowcastCsv(const NowcastScenario& nowcast);

// The desk's generating coefficients in the calm (false) or persistent (true) regime: 3 x 7,
// columns const, lag 1 of alder, birch, cedar, lag 2 of the same (the engine's layout).
Eigen::MatrixXd DeskCoefficients(bool persistent);
// The error covariance Omega of the calm regime (percent^2); doubled from kDeskVarianceBreak.
Eigen::MatrixXd DeskErrorCovariance();
// The spectral radius of the companion matrix of DeskCoefficients(persistent).
double DeskSpectralRadius(bool persistent);

}  // namespace rimwatch::cli
