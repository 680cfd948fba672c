// SPDX-License-Identifier: MIT
// Timing of the chemistry model: one pH evaluation of a triprotic acid (ideal and Davies), the same
// in Jet arithmetic, and simulating a 300-point run. Prints medians over repeated measurements.
#include <ceres/jet.h>

#include <algorithm>
#include <chrono>
#include <cstdio>
#include <functional>
#include <vector>

#include "veq/chem/analytes.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"
#include "veq/chem/simulate.hpp"

namespace chem = veq::chem;
using Clock = std::chrono::steady_clock;

namespace {

volatile double g_sink = 0.0;  // keeps results alive

// Median over `repeats` runs of body(), in nanoseconds per item.
double median_ns(int repeats, double items, const std::function<double()>& body) {
  std::vector<double> t;
  for (int r = 0; r < repeats; ++r) {
    const auto start = Clock::now();
    g_sink = g_sink + body();
    const auto stop = Clock::now();
    t.push_back(std::chrono::duration<double, std::nano>(stop - start).count() / items);
  }
  std::sort(t.begin(), t.end());
  return t[t.size() / 2];
}

chem::Model<double> triprotic(chem::ActivityModel activity) {
  chem::Sample s;
  s.volume_mL = 25.0;
  s.analytes = {chem::analyte("phosphoric acid", 0.05)};
  chem::Titrant t;
  t.conc_mol_L = 0.1;
  chem::ModelOptions o;
  o.activity = activity;
  return chem::build_model(s, t, o);
}

}  // namespace

int main() {
  constexpr int kVolumes = 200;
  constexpr int kRepeats = 31;
  std::vector<double> volumes;
  for (int i = 0; i < kVolumes; ++i) volumes.push_back(45.0 * i / (kVolumes - 1));

  std::printf("veq chemistry benchmark: phosphoric acid 0.05 mol/L, 25 mL, 0.1 mol/L NaOH, %d volumes 0-45 mL\n",
              kVolumes);
  std::printf("median of %d repeats; times per pH evaluation (one volume)\n\n", kRepeats);
  std::printf("%-44s %12s %12s\n", "", "ideal", "Davies");
  for (const char* what : {"cold start (no guess)",
                           "warm: previous volume",
                           "warm: same volume, new parameters",
                           "Jet<double,4>, same volume, new parameters"}) {
    double ns[2] = {0, 0};
    for (int a = 0; a < 2; ++a) {
      const auto activity = a == 0 ? chem::ActivityModel::ideal : chem::ActivityModel::davies;
      const chem::Model<double> m = triprotic(activity);
      const std::string w = what;
      if (w == "cold start (no guess)") {
        const chem::Titration<double> t(m);
        ns[a] = median_ns(kRepeats, kVolumes, [&] {
          double s = 0;
          for (double v : volumes) s += t.pH(v);
          return s;
        });
      } else if (w == "warm: previous volume") {
        const chem::Titration<double> t(m);
        ns[a] = median_ns(kRepeats, kVolumes, [&] {
          double s = 0;
          chem::Equilibrium warm;
          for (double v : volumes) s += t.pH(v, &warm);
          return s;
        });
      } else if (w == "warm: same volume, new parameters") {
        // A fitter's inner loop: each parameter set moves pKa and Ct a little; every volume starts from its
        // solution for the previous set. The model is rebuilt per set (inside the timing).
        std::vector<chem::Equilibrium> states(volumes.size());
        {
          const chem::Titration<double> t(m);
          for (std::size_t i = 0; i < volumes.size(); ++i) (void)t.pH(volumes[i], &states[i]);
        }
        int set = 0;
        ns[a] = median_ns(kRepeats, kVolumes, [&] {
          chem::Model<double> p = m;
          const double step = (++set % 2 == 0 ? 1.0 : -1.0) * 1e-3;
          p.protolytes[0].pKa[1] += step;
          p.titrant_conc_mol_L *= 1.0 + step;
          const chem::Titration<double> t(p);
          double s = 0;
          for (std::size_t i = 0; i < volumes.size(); ++i) s += t.pH(volumes[i], &states[i]);
          return s;
        });
      } else {
        // As above, in Jet arithmetic with 4 derivative directions (pKa1, pKa2, c, Ct): the fitter's
        // automatic-differentiation call. The Jet model is built per set inside the timing.
        using Jet = ceres::Jet<double, 4>;
        std::vector<chem::Equilibrium> states(volumes.size());
        {
          const chem::Titration<double> t(m);
          for (std::size_t i = 0; i < volumes.size(); ++i) (void)t.pH(volumes[i], &states[i]);
        }
        int set = 0;
        ns[a] = median_ns(kRepeats, kVolumes, [&] {
          chem::Model<double> p = m;
          const double step = (++set % 2 == 0 ? 1.0 : -1.0) * 1e-3;
          p.protolytes[0].pKa[1] += step;
          p.titrant_conc_mol_L *= 1.0 + step;
          chem::Model<Jet> mj = chem::model_cast<Jet>(p);
          mj.protolytes[0].pKa[0].v[0] = 1;
          mj.protolytes[0].pKa[1].v[1] = 1;
          mj.protolytes[0].conc_mol_L.v[2] = 1;
          mj.titrant_conc_mol_L.v[3] = 1;
          const chem::Titration<Jet> t(mj);
          double s = 0;
          for (std::size_t i = 0; i < volumes.size(); ++i) s += t.pH(Jet(volumes[i]), &states[i]).v[1];
          return s;
        });
      }
    }
    std::printf("%-44s %9.3f us %9.3f us\n", what, ns[0] / 1000.0, ns[1] / 1000.0);
  }

  // Charge-balance evaluations per point, for the record.
  for (int a = 0; a < 2; ++a) {
    const chem::Titration<double> t(triprotic(a == 0 ? chem::ActivityModel::ideal : chem::ActivityModel::davies));
    chem::Equilibrium warm;
    long evals = 0, iters = 0;
    for (double v : volumes) {
      const auto p = t.solve(v, &warm);
      evals += p.state.root_evaluations;
      iters += p.state.activity_iterations;
    }
    std::printf("%s: %.1f charge-balance evaluations and %.1f ionic-strength iterations per point (warm)\n",
                a == 0 ? "ideal " : "Davies",
                static_cast<double>(evals) / kVolumes,
                static_cast<double>(iters) / kVolumes);
  }

  // The closed form V(pH), per point.
  for (int a = 0; a < 2; ++a) {
    const chem::Titration<double> t(triprotic(a == 0 ? chem::ActivityModel::ideal : chem::ActivityModel::davies));
    const double ns = median_ns(kRepeats, kVolumes, [&] {
      double s = 0;
      for (int i = 0; i < kVolumes; ++i) s += t.volume_at_pH(2.0 + 10.0 * i / (kVolumes - 1));
      return s;
    });
    std::printf("%s: closed-form V(pH): %.3f us per point\n", a == 0 ? "ideal " : "Davies", ns / 1000.0);
  }

  // A 300-point run: constant dosing 0.15 mL from 0 to 44.85 mL (300 readings), Davies, noise, mV.
  chem::SimulationOptions o;
  o.sample.analytes = {chem::analyte("phosphoric acid", 0.05)};
  o.dosing.step_mL = 0.15;
  o.dosing.final_volume_mL = 44.85;
  o.electrode.signal = veq::SignalKind::mv;
  o.noise.sd = 0.2;
  const std::size_t n = chem::simulate(o).readings.size();
  const double sim_ns = median_ns(kRepeats, 1.0, [&] { return chem::simulate(o).readings.back().signal; });
  chem::OutputFormat f;
  const chem::Simulation sim = chem::simulate(o);
  const double fmt_ns = median_ns(kRepeats, 1.0, [&] { return static_cast<double>(chem::format_run(sim, f).size()); });
  std::printf("\nsimulate(): %zu-point run (Davies, mV, noise): %.1f us; writing it as CSV: %.1f us\n",
              n,
              sim_ns / 1000.0,
              fmt_ns / 1000.0);
  return 0;
}
