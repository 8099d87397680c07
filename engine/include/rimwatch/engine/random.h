// A small deterministic random source for calibration by simulation inside the engine.
//
// xoshiro256** (Blackman & Vigna 2018, "Scrambled linear pseudorandom number generators") seeded
// by splitmix64, with Marsaglia's polar method for normals. Unlike std::normal_distribution, the
// sequence is fixed by this code, so thresholds calibrated by simulation are identical on every
// standard library and every run (live and replay agree to the last bit).
#pragma once

#include <cmath>
#include <cstdint>

namespace rimwatch {

class DeterministicRandom {
 public:
  explicit DeterministicRandom(std::uint64_t seed) {
    for (auto& s : state_) s = SplitMix(&seed);
  }

  std::uint64_t Next() {
    const std::uint64_t result = Rotl(state_[1] * 5, 7) * 9;
    const std::uint64_t t = state_[1] << 17;
    state_[2] ^= state_[0];
    state_[3] ^= state_[1];
    state_[1] ^= state_[2];
    state_[0] ^= state_[3];
    state_[2] ^= t;
    state_[3] = Rotl(state_[3], 45);
    return result;
  }

  // Uniform on (0, 1): 53 random bits, never exactly 0 or 1.
  double Uniform() { return (static_cast<double>(Next() >> 11) + 0.5) * 0x1.0p-53; }

  // Standard normal (polar method).
  double Normal() {
    if (has_spare_) {
      has_spare_ = false;
      return spare_;
    }
    double u, v, s;
    do {
      u = 2.0 * Uniform() - 1.0;
      v = 2.0 * Uniform() - 1.0;
      s = u * u + v * v;
    } while (s >= 1.0 || s == 0.0);
    const double m = std::sqrt(-2.0 * std::log(s) / s);
    spare_ = v * m;
    has_spare_ = true;
    return u * m;
  }

 private:
  static std::uint64_t Rotl(std::uint64_t x, int k) { return (x << k) | (x >> (64 - k)); }
  static std::uint64_t SplitMix(std::uint64_t* x) {
    std::uint64_t z = (*x += 0x9e3779b97f4a7c15ULL);
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
    return z ^ (z >> 31);
  }
  std::uint64_t state_[4];
  double spare_ = 0.0;
  bool has_spare_ = false;
};

}  // namespace rimwatch
