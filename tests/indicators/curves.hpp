// SPDX-License-Identifier: MIT
// Synthetic runs and model curves for the indicator tests, built on the exact charge balance of tests/support.
#pragma once

#include <cmath>
#include <cstdint>
#include <string>
#include <vector>

#include "support/charge_balance.hpp"
#include "veq/core/run.hpp"
#include "veq/indicators/colour_change.hpp"

namespace veq::test {

// Volumes from 0 to to_mL in steps of step_mL, with step fine_step_mL inside [fine_from_mL, fine_to_mL]
// (as a titrator doses finer near an expected endpoint).
inline std::vector<double> dosing(
    double to_mL, double step_mL, double fine_from_mL, double fine_to_mL, double fine_step_mL) {
  std::vector<double> v;
  double x = 0.0;
  while (x <= to_mL + 1e-9) {
    v.push_back(x);
    const bool fine = x >= fine_from_mL - 1e-9 && x < fine_to_mL - 1e-9;
    x = std::round((x + (fine ? fine_step_mL : step_mL)) * 1e6) / 1e6;
    if (!fine && x > fine_from_mL + 1e-9 && v.back() < fine_from_mL - 1e-9) x = fine_from_mL;
  }
  return v;
}

// A run whose readings are the exact model pH at each volume (no noise).
inline Run model_run(const Sample& s, const std::vector<double>& volumes) {
  Run r;
  r.source = "synthetic";
  for (std::size_t i = 0; i < volumes.size(); ++i) {
    r.volume_mL.push_back(volumes[i]);
    r.signal_values.push_back(pH_at_volume(s, volumes[i]));
    r.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  r.facts.sample_volume_mL = s.V0_mL;
  r.facts.titrant_conc_mol_L = std::fabs(s.titrant);
  r.facts.titrant_kind = s.titrant > 0 ? TitrantKind::base : TitrantKind::acid;
  return r;
}

// The exact model as a PhCurve (the interface a fitted model plugs into), knots every knot_step_mL.
inline indicators::PhCurve model_curve(const Sample& s, double to_mL, double knot_step_mL = 0.25) {
  indicators::PhCurve c;
  c.pH_at_mL = [s](double v) { return pH_at_volume(s, v); };
  for (int i = 0; i * knot_step_mL <= to_mL + 1e-9; ++i) c.knots_mL.push_back(i * knot_step_mL);
  c.direction = s.titrant > 0 ? +1 : -1;
  c.method = "model";
  c.exact = true;
  return c;
}

// Indicator error [%] from the model alone: the exact volume at which the solution has pH seen_pH,
// against the stoichiometric equivalence volume.
inline double model_error_percent(const Sample& s, double seen_pH, double equivalence_mL) {
  return 100.0 * (volume_at_pH(s, seen_pH) - equivalence_mL) / equivalence_mL;
}

// 0.1 mol/L HCl, V0 mL, with 0.1 mol/L NaOH (or the mirror image: NaOH with HCl).
inline Sample strong_acid_with_base(double V0_mL) {
  Sample s;
  s.V0_mL = V0_mL;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  return s;
}
inline Sample strong_base_with_acid(double V0_mL) {
  Sample s;
  s.V0_mL = V0_mL;
  s.strong_base = 0.1;
  s.titrant = -0.1;
  return s;
}

// Acetic acid 0.1 mol/L, pKa 4.756 (CRC Handbook, "Dissociation constants of organic acids in aqueous
// solution"; REFERENCES §2), V0 mL, with 0.1 mol/L NaOH.
inline Sample acetic_acid_with_base(double V0_mL) {
  Sample s;
  s.V0_mL = V0_mL;
  s.weak = {{0.1, {4.756}}};
  s.titrant = 0.1;
  return s;
}

// Ammonia 0.1 mol/L (NH4+ pKa 9.25, CRC Handbook, "Dissociation constants of inorganic acids and bases";
// REFERENCES §2), V0 mL, with 0.1 mol/L HCl. NH3 is written as NH4+ plus an equal amount of strong base
// (NH4Cl + NaOH = NH3 + NaCl), which the charge balance of tests/support takes as it is.
inline Sample ammonia_with_acid(double V0_mL) {
  Sample s;
  s.V0_mL = V0_mL;
  s.weak = {{0.1, {9.25}}};
  s.strong_base = 0.1;
  s.titrant = -0.1;
  return s;
}

}  // namespace veq::test
