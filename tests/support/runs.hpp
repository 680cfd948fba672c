// SPDX-License-Identifier: MIT
// Synthetic runs for tests: readings of the exact charge-balance curve, optionally with Gaussian noise.
#pragma once

#include <cmath>
#include <cstdint>
#include <random>
#include <vector>

#include "support/charge_balance.hpp"
#include "veq/core/run.hpp"

namespace veq::test {

// Volumes from..to in steps of step [mL].
inline std::vector<double> grid(double from, double to, double step) {
  std::vector<double> v;
  for (int i = 0; from + i * step <= to + 1e-9; ++i) v.push_back(from + i * step);
  return v;
}

// Which facts a synthetic run states: none (derivative endpoints only), or V0 and Ct (Gran too).
enum class Facts { none, volumes };

// A run of the exact pH at each volume plus Gaussian noise of SD noise_pH (fixed seed).
inline Run synthetic_run(const Sample& s, const std::vector<double>& volumes, double noise_pH = 0.0,
                         unsigned seed = 1, Facts facts = Facts::none) {
  Run r;
  r.source = "synthetic";
  if (facts == Facts::volumes) {
    r.facts.sample_volume_mL = s.V0_mL;
    r.facts.titrant_conc_mol_L = std::fabs(s.titrant);
  }
  std::mt19937 rng(seed);
  std::normal_distribution<double> gauss(0.0, 1.0);
  for (std::size_t i = 0; i < volumes.size(); ++i) {
    r.volume_mL.push_back(volumes[i]);
    r.signal_values.push_back(pH_at_volume(s, volumes[i]) + noise_pH * gauss(rng));
    r.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  return r;
}

}  // namespace veq::test
