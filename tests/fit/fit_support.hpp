// SPDX-License-Identifier: MIT
// Simulated runs for the fit tests: veq's simulator (charge balance, Davies, IAPWS Kw) turned into a Run.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

#include "veq/analyze.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"

namespace veq::test {

// The simulator's readings as a run with its facts (V0, nominal Ct, titrant kind, temperature). exact
// takes the noise-free signal; otherwise the recorded one.
inline Run run_from_simulation(const chem::Simulation& sim, bool exact, double nominal_titrant_mol_L = 0.0) {
  Run r;
  r.source = "simulated";
  r.signal = sim.options.electrode.signal;
  for (std::size_t i = 0; i < sim.readings.size(); ++i) {
    r.volume_mL.push_back(sim.readings[i].volume_mL);
    r.signal_values.push_back(exact ? sim.readings[i].signal_true : sim.readings[i].signal);
    r.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  r.facts.sample_volume_mL = sim.options.sample.volume_mL;
  r.facts.titrant_conc_mol_L = nominal_titrant_mol_L > 0 ? nominal_titrant_mol_L : sim.options.titrant.conc_mol_L;
  r.facts.titrant_kind = sim.options.titrant.kind;
  r.facts.temperature_C = sim.options.model.temperature_C;
  return r;
}

// A simulation of the named substances (analyte table) at their concentrations, V0 25 mL, 0.1 mol/L
// titrant, constant dosing of step_mL to 1.3 x the last equivalence volume.
inline chem::SimulationOptions simulation_of(const std::vector<std::pair<std::string, double>>& analytes,
                                             TitrantKind titrant,
                                             double step_mL) {
  chem::SimulationOptions o;
  for (const auto& [name, conc] : analytes) o.sample.analytes.push_back(chem::analyte(name, conc));
  o.sample.volume_mL = 25.0;
  o.titrant.kind = titrant;
  o.titrant.conc_mol_L = 0.1;
  o.dosing.step_mL = step_mL;
  return o;
}

}  // namespace veq::test
