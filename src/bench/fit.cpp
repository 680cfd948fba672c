// SPDX-License-Identifier: MIT
// Timing of the charge-balance fit: one diprotic model, and the whole model selection, on a 200-point run.
// Prints medians over repeated fits and what the warm-started solver did.
#include <algorithm>
#include <chrono>
#include <cstdio>
#include <functional>
#include <vector>

#include "veq/analyze.hpp"
#include "veq/chem/simulate.hpp"
#include "veq/fit/fit.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/gran.hpp"
#include "veq/signal/prepare.hpp"

namespace chem = veq::chem;
namespace fit = veq::fit;
using Clock = std::chrono::steady_clock;

namespace {

volatile double g_sink = 0.0;

double median_us(int repeats, const std::function<double()>& body) {
  std::vector<double> t;
  for (int r = 0; r < repeats; ++r) {
    const auto start = Clock::now();
    g_sink = g_sink + body();
    const auto stop = Clock::now();
    t.push_back(std::chrono::duration<double, std::micro>(stop - start).count());
  }
  std::sort(t.begin(), t.end());
  return t[t.size() / 2];
}

// A diprotic acid H2A, 0.05 mol/L (pKa 4.2 and 8.8), 25 mL, with 0.1 mol/L NaOH: 200 readings 0-32.5 mL,
// Davies activity, 0.01 pH noise. Invented values, chosen for two well separated equivalence points.
veq::Run diprotic_run(veq::SignalKind signal, std::uint64_t seed) {
  chem::SimulationOptions o;
  chem::Analyte a;
  a.name = "H2A";
  a.conc_mol_L = 0.05;
  a.pKa_25C = {4.2, 8.8};
  o.sample.analytes = {a};
  o.sample.volume_mL = 25.0;
  o.titrant.conc_mol_L = 0.1;
  o.dosing.step_mL = 32.5 / 199.0;
  o.dosing.final_volume_mL = 32.5;
  o.dosing.volume_resolution_mL = 1e-6;
  o.electrode.signal = signal;
  o.noise.sd = signal == veq::SignalKind::ph ? 0.01 : 0.6;
  o.noise.seed = seed;
  const chem::Simulation sim = chem::simulate(o);
  veq::Run run;
  run.source = "bench";
  run.signal = signal;
  for (std::size_t i = 0; i < sim.readings.size(); ++i) {
    run.volume_mL.push_back(sim.readings[i].volume_mL);
    run.signal_values.push_back(sim.readings[i].signal);
    run.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  run.facts.sample_volume_mL = 25.0;
  run.facts.titrant_conc_mol_L = 0.1;
  run.facts.titrant_kind = veq::TitrantKind::base;
  return run;
}

struct Prepared {
  veq::Curve curve;
  veq::signal::EndpointResult endpoints;
  std::vector<veq::signal::GranEndpoint> gran;
  fit::FitInputs inputs;
};

Prepared prepare(const veq::Run& run) {
  Prepared p;
  p.curve = veq::signal::prepare(run);
  p.endpoints = veq::signal::find_endpoints(p.curve);
  veq::signal::GranInputs gi;
  gi.sample_volume_mL = 25.0;
  gi.titrant_conc_mol_L = 0.1;
  std::vector<veq::Diagnostic> w;
  p.gran = veq::signal::gran_endpoints(p.curve, p.endpoints.endpoints, gi, {}, w);
  for (std::size_t i = 0; i < p.endpoints.endpoints.size(); ++i) {
    auto& e = p.endpoints.endpoints[i];
    const auto c = veq::signal::consensus(e, p.gran[i]);
    e.volume_mL = c.volume_mL;
    e.uncertainty_mL = c.uncertainty_mL;
  }
  p.inputs.sample_volume_mL = 25.0;
  p.inputs.titrant_conc_mol_L = 0.1;
  p.inputs.titrant = veq::TitrantKind::base;
  return p;
}

}  // namespace

int main() {
  constexpr int kRepeats = 41;
  std::printf("veq fit benchmark: diprotic acid 0.05 mol/L (pKa 4.2, 8.8), 25 mL, 0.1 mol/L NaOH, 200 readings,\n");
  std::printf("Davies activity, noise 0.01 pH (0.6 mV); median of %d fits, one thread\n\n", kRepeats);
  for (const auto signal : {veq::SignalKind::ph, veq::SignalKind::mv}) {
    const Prepared p = prepare(diprotic_run(signal, 11));
    fit::FitOptions forced;
    forced.model = "diprotic_acid";
    const fit::FitOptions select;
    fit::FitResult last_forced = fit::fit_titration(p.curve, p.inputs, p.endpoints.endpoints, p.gran, forced);
    fit::FitResult last_select = fit::fit_titration(p.curve, p.inputs, p.endpoints.endpoints, p.gran, select);
    const double t_forced = median_us(kRepeats, [&] {
      return fit::fit_titration(p.curve, p.inputs, p.endpoints.endpoints, p.gran, forced).best->cost;
    });
    const double t_select = median_us(kRepeats, [&] {
      return fit::fit_titration(p.curve, p.inputs, p.endpoints.endpoints, p.gran, select).best->cost;
    });
    const char* unit = signal == veq::SignalKind::ph ? "pH" : "mV";
    std::printf("%s run (%zu readings, %zu endpoints):\n", unit, p.curve.volume_mL.size(), p.endpoints.endpoints.size());
    std::printf("  one model (diprotic_acid, %d free parameters): %8.1f us   [%d iterations, %s]\n",
                last_forced.best->free_parameters,
                t_forced,
                last_forced.best->iterations,
                last_forced.best->termination.substr(0, 11).c_str());
    std::printf("  model selection (%zu candidates):             %8.1f us   [chose %s, runner-up %s]\n",
                last_select.candidates.size(),
                t_select,
                last_select.best->model.c_str(),
                last_select.runner_up ? last_select.runner_up->model.c_str() : "-");
  }
  std::printf("\ntargets: one model <= 500 us, model selection <= 2000 us (200-point diprotic run, one core)\n");
  return 0;
}
