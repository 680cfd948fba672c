// SPDX-License-Identifier: MIT
// Simulated titration exports of mixed kinds, computed by veq's chemistry model with Davies activity
// coefficients (as a real electrode reads a real solution; chem::Titration).
//
// Used where a test or the benchmark needs many realistic files and no
// particular expected value: a batch folder, the SIGKILL test, the 10,000-run
// benchmark. Each run is a pure function of (seed, index). Kinds, in turn:
//   0 strong acid with a strong base      3 strong base with a strong acid (pH falls)
//   1 weak acid (pKa 4.76) with a base    4 carbonate with a strong acid (two endpoints)
//   2 phosphoric acid with a base (two)   5 like 0 or 1, logged in mV with E0 and slope in the metadata
// pKa values from the analyte table (src/data/analytes.tsv); only shapes matter here.
#pragma once

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <cstdint>
#include <random>
#include <string>
#include <vector>

#include "veq/chem/analytes.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"

namespace veq::test {

struct SimulatedRun {
  std::string name;  // file name, e.g. "sim_00042_weak_acid.csv"
  std::string text;  // the whole export
  int kind = 0;
  std::size_t points = 0;
};

// Run `index` of the family `seed`: about 150-400 readings (uniform), constant or
// endpoint-dense dosing, Gaussian pH noise 0.002-0.006, metadata with sample
// volume and titrant so that Gran applies.
inline SimulatedRun simulate_run(std::uint64_t seed, std::uint64_t index) {
  std::mt19937_64 rng(seed * 0x9E3779B97F4A7C15ULL + index);
  std::uniform_real_distribution<double> u01(0.0, 1.0);
  SimulatedRun out;
  out.kind = static_cast<int>(index % 6);
  int chem = out.kind;
  const bool mv = chem == 5;
  if (mv) chem = u01(rng) < 0.5 ? 0 : 1;
  chem::Sample sample;
  sample.volume_mL = 10.0 + 40.0 * u01(rng);
  const double c = 0.02 + 0.1 * u01(rng);
  chem::Titrant titrant;
  titrant.conc_mol_L = 0.1;
  std::vector<double> veq;
  const char* kind_name = "";
  auto add = [&](const char* name, double conc) { sample.analytes.push_back(chem::analyte(name, conc)); };
  const double V0 = sample.volume_mL;
  switch (chem) {
    case 0:
      add("hydrochloric acid", c), kind_name = "strong_acid";
      veq = {c * V0 / 0.1};
      break;
    case 1:
      add("acetic acid", c), kind_name = "weak_acid";
      veq = {c * V0 / 0.1};
      break;
    case 2:
      add("phosphoric acid", 0.5 * c), kind_name = "phosphoric";
      veq = {0.5 * c * V0 / 0.1, c * V0 / 0.1};
      break;
    case 3:
      add("sodium hydroxide", c), titrant.kind = TitrantKind::acid, kind_name = "strong_base";
      veq = {c * V0 / 0.1};
      break;
    default:
      add("sodium carbonate", 0.5 * c), titrant.kind = TitrantKind::acid, kind_name = "carbonate";
      veq = {0.5 * c * V0 / 0.1, c * V0 / 0.1};
      break;
  }
  const chem::Titration<double> titration(chem::build_model(sample, titrant));
  chem::Equilibrium warm;
  const std::size_t n = 150 + static_cast<std::size_t>(u01(rng) * 251.0);
  const double vmax = veq.back() * (1.4 + 0.4 * u01(rng));
  std::vector<double> v;
  v.reserve(n);
  if (u01(rng) < 0.5) {
    for (std::size_t i = 0; i < n; ++i) v.push_back(vmax * static_cast<double>(i) / static_cast<double>(n - 1));
  } else {
    // Dosing that slows down near each equivalence volume, as automatic titrators
    // do: step(V) = h * (r + (1 - r) * min_k (1 - exp(-((V - Veq_k) / w)^2))), r = 0.15,
    // w = 4 % of the last equivalence volume, h chosen for about n readings.
    const double w = 0.04 * veq.back();
    auto shape = [&](double x) {
      double m = 1.0;
      for (double e : veq) m = std::min(m, 1.0 - std::exp(-((x - e) / w) * ((x - e) / w)));
      return 0.15 + 0.85 * m;
    };
    double integral = 0.0;
    for (int i = 0; i < 2000; ++i) integral += (vmax / 2000.0) / shape(vmax * (i + 0.5) / 2000.0);
    const double h = integral / static_cast<double>(n - 1);
    for (double x = 0.0; x < vmax * (1 + 1e-9); x += h * shape(x)) v.push_back(std::round(x * 1000.0) / 1000.0);
    v.erase(std::unique(v.begin(), v.end()), v.end());
  }
  std::normal_distribution<double> noise(0.0, 0.002 + 0.004 * u01(rng));
  const double e0 = 400.0 + 20.0 * u01(rng), slope = 57.5 + 1.5 * u01(rng);
  out.name = fmt::format("sim_{:05d}_{}{}.csv", index, kind_name, mv ? "_mV" : "");
  std::string& t = out.text;
  t.reserve(64 + 16 * v.size());
  t += fmt::format("Sample: SIM-{:05d}\nSample volume: {:.2f} mL\nTitrant: {} {:.4f} mol/L\nTemperature: 25.0 °C\n",
                   index,
                   V0,
                   titrant.kind == TitrantKind::base ? "NaOH" : "HCl",
                   titrant.conc_mol_L);
  if (mv) t += fmt::format("E0: {:.1f} mV\nSlope: {:.2f} mV\n", e0, slope);
  t += mv ? "\nVolume (mL),E (mV)\n" : "\nVolume (mL),pH\n";
  for (double x : v) {
    const double ph = titration.pH(x, &warm) + noise(rng);
    if (mv)
      t += fmt::format("{:.3f},{:.1f}\n", x, e0 - slope * ph);
    else
      t += fmt::format("{:.3f},{:.3f}\n", x, ph);
  }
  out.points = v.size();
  return out;
}

}  // namespace veq::test
