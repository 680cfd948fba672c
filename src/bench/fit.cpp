// SPDX-License-Identifier: MIT
// Timing of the charge-balance fit: one diprotic model, and the whole model selection, on a 200-point run.
// Prints medians over repeated fits and what the warm-started solver did.
#include "veq/fit/fit.hpp"

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <functional>
#include <vector>

#include "fit/balance.hpp"
#include "veq/analyze.hpp"
#include "veq/chem/simulate.hpp"
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

// Per reading, what re-solving the chemistry costs when the parameters change a little (a fitter's inner
// loop): chem's bracketing solver warm-started from the same reading's last solution; the fit's Newton
// step from it; and chem's closed form V(pH), the alternative (residuals in volume).
void per_point_costs() {
  chem::Sample s;
  chem::Analyte a;
  a.conc_mol_L = 0.05;
  a.pKa_25C = {4.2, 8.8};
  s.analytes = {a};
  chem::Titrant t;
  const chem::Model<double> m = chem::build_model(s, t);
  std::vector<double> volumes;
  for (int i = 0; i < 200; ++i) volumes.push_back(32.5 * i / 199.0);
  std::vector<chem::Equilibrium> states(volumes.size());
  {
    const chem::Titration<double> tt(m);
    for (std::size_t i = 0; i < volumes.size(); ++i) (void)tt.pH(volumes[i], &states[i]);
  }
  int set = 0;
  auto perturbed = [&] {
    chem::Model<double> q = m;
    const double step = (++set % 2 == 0 ? 1.0 : -1.0) * 1e-3;
    q.protolytes[0].pKa[1] += step;
    q.protolytes[0].conc_mol_L *= 1.0 + step;
    return q;
  };
  std::vector<chem::Equilibrium> w1 = states, w2 = states;
  const double bracketed = median_us(41, [&] {
    const chem::Titration<double> tt(perturbed());
    double sum = 0;
    for (std::size_t i = 0; i < volumes.size(); ++i) sum += tt.pH(volumes[i], &w1[i]);
    return sum;
  });
  long newton_iterations = 0, solves = 0;
  const double newton = median_us(41, [&] {
    const veq::fit::detail::FastBalance fb(perturbed());
    chem::detail::BalanceJacobian jac;
    double sum = 0;
    for (std::size_t i = 0; i < volumes.size(); ++i) {
      if (fb.newton(volumes[i], w2[i], jac)) {
        newton_iterations += w2[i].root_evaluations;
        ++solves;
      }
      sum += w2[i].pH();
    }
    return sum;
  });
  const double closed = median_us(41, [&] {
    const chem::Titration<double> tt(perturbed());
    double sum = 0;
    for (int i = 0; i < 200; ++i) sum += tt.volume_at_pH(2.5 + 9.5 * i / 199.0);
    return sum;
  });
  std::printf("per reading, parameters changed by 1e-3 (200 readings, Davies):\n");
  std::printf("  chem bracketing solver (TOMS 748), warm from the last solution: %6.3f us\n", bracketed / 200.0);
  std::printf("  fit's Newton on (log[H+], log gamma), warm from the same:       %6.3f us  [%.2f iterations]\n",
              newton / 200.0,
              solves ? static_cast<double>(newton_iterations) / solves : 0.0);
  std::printf("  chem closed form V(pH) (volume residuals instead):              %6.3f us\n\n", closed / 200.0);
}

int main() {
  constexpr int kRepeats = 41;
  std::printf("veq fit benchmark: diprotic acid 0.05 mol/L (pKa 4.2, 8.8), 25 mL, 0.1 mol/L NaOH, 200 readings,\n");
  std::printf("Davies activity, noise 0.01 pH (0.6 mV); median of %d fits, one thread\n\n", kRepeats);
  per_point_costs();
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
    std::printf(
        "%s run (%zu readings, %zu endpoints):\n", unit, p.curve.volume_mL.size(), p.endpoints.endpoints.size());
    std::printf("  one model (diprotic_acid, %d free parameters): %8.1f us   [%d iterations, %s]\n",
                last_forced.best->free_parameters,
                t_forced,
                last_forced.best->iterations,
                last_forced.best->termination.substr(0, 11).c_str());
    const veq::fit::SolverStats& st = last_forced.best->solver;
    std::printf(
        "      %ld evaluations (%ld with the Jacobian), %ld readings re-solved, %.2f Newton iterations each, "
        "%ld bracketed fallbacks\n",
        st.evaluations,
        st.jacobian_evaluations,
        st.point_solves,
        st.point_solves ? static_cast<double>(st.newton_iterations) / st.point_solves : 0.0,
        st.bracketed_fallbacks);
    std::printf("  model selection (%zu candidates):             %8.1f us   [chose %s, runner-up %s]\n",
                last_select.candidates.size(),
                t_select,
                last_select.best->model.c_str(),
                last_select.runner_up ? last_select.runner_up->model.c_str() : "-");
  }
  std::printf("\ntargets: one model <= 500 us, model selection <= 2000 us (200-point diprotic run, one core)\n");
  return 0;
}
