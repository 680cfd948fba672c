// SPDX-License-Identifier: MIT
// Accuracy study of the charge-balance fit: 200 simulated 150-point runs with 0.01 pH noise, fitted through
// veq::analyze(); how far the fitted pKa values and concentrations land from the truth, and how often the
// 95 % intervals cover it (a check of the uncertainty itself). Also: how often model selection picks the
// chemistry the run was made with.
#include <algorithm>
#include <chrono>
#include <cmath>
#include <cstdio>
#include <map>
#include <string>
#include <vector>

#include "veq/analyze.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"

namespace chem = veq::chem;

namespace {

struct System {
  const char* analyte;  // analyte table name (pKa values from its cited handbook source)
  const char* model;    // the fit model of that chemistry
  veq::TitrantKind titrant;
  int steps;             // titrated steps (sets the dosing range)
  double c_low, c_high;  // concentration range drawn from [mol/L]
};

// Handbook pKa values (analyte table, REFERENCES §2): acetic 4.756; phosphoric 2.15/7.20/12.34; NH4+ 9.25;
// carbonic 6.35/10.33. Concentrations drawn uniformly in the range.
const System kSystems[] = {
    {"acetic acid", "weak_acid", veq::TitrantKind::base, 1, 0.02, 0.15},
    {"phosphoric acid", "triprotic_acid", veq::TitrantKind::base, 2, 0.02, 0.06},
    {"ammonia", "weak_base", veq::TitrantKind::acid, 1, 0.02, 0.15},
    {"sodium carbonate", "carbonate_base", veq::TitrantKind::acid, 2, 0.02, 0.06},
};

double median(std::vector<double> v) {
  if (v.empty()) return 0.0;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : 0.5 * (v[n / 2 - 1] + v[n / 2]);
}

struct Tally {
  std::vector<double> abs_error;  // |fitted - true| (pKa) or |fitted/true - 1| (c)
  int covered = 0;
  int intervals = 0;
};

}  // namespace

int main() {
  constexpr int kRuns = 200;
  constexpr int kPoints = 150;
  constexpr double kNoise = 0.01;
  std::map<std::string, Tally> by_param;  // "acetic acid pKa1", ...
  Tally pKa_all, c_all, all;
  int fitted = 0, usable = 0, selected_right = 0, selected_right_bic = 0;
  std::vector<double> fit_ms;
  std::map<std::string, int> wrong_choices;
  for (int run = 0; run < kRuns; ++run) {
    const System& sys = kSystems[run % 4];
    // Deterministic draw of the concentration from the run number (golden-ratio sequence).
    const double frac = std::fmod(0.5 + 0.6180339887498949 * run, 1.0);
    const double conc = sys.c_low + frac * (sys.c_high - sys.c_low);
    chem::SimulationOptions o;
    o.sample.volume_mL = 25.0;
    o.sample.analytes = {chem::analyte(sys.analyte, conc)};
    o.titrant.kind = sys.titrant;
    o.titrant.conc_mol_L = 0.1;
    const double v_last = 25.0 * conc * sys.steps / 0.1;
    o.dosing.final_volume_mL = 1.3 * v_last;
    o.dosing.step_mL = o.dosing.final_volume_mL / (kPoints - 1);
    o.dosing.volume_resolution_mL = 1e-6;
    o.noise.sd = kNoise;
    o.noise.seed = 1000 + static_cast<std::uint64_t>(run);
    const chem::Simulation sim = chem::simulate(o);
    veq::Run r;
    r.source = "accuracy";
    for (std::size_t i = 0; i < sim.readings.size(); ++i) {
      r.volume_mL.push_back(sim.readings[i].volume_mL);
      r.signal_values.push_back(sim.readings[i].signal);
      r.line.push_back(static_cast<std::uint32_t>(i + 2));
    }
    r.facts.sample_volume_mL = 25.0;
    r.facts.titrant_conc_mol_L = 0.1;
    r.facts.titrant_kind = sys.titrant;
    r.facts.temperature_C = 25.0;

    // The model named (the chemistry known), as a lab fits a method's analyte.
    veq::AnalyzeOptions ao;
    ao.fit.model = sys.model;
    const auto t0 = std::chrono::steady_clock::now();
    const veq::Analysis a = veq::analyze(r, ao);
    fit_ms.push_back(std::chrono::duration<double, std::milli>(std::chrono::steady_clock::now() - t0).count());
    // Model selection on the same run (AICc here; BIC, the default, below).
    veq::AnalyzeOptions aicc;
    aicc.fit.criterion = veq::fit::Criterion::aicc;
    const veq::Analysis s = veq::analyze(r, aicc);
    if (s.fit.best && s.fit.best->model == sys.model)
      ++selected_right;
    else
      ++wrong_choices[std::string(sys.analyte) + " -> " + (s.fit.best ? s.fit.best->model : "none")];
    const veq::Analysis sb = veq::analyze(r);
    if (sb.fit.best && sb.fit.best->model == sys.model) ++selected_right_bic;
    if (!a.fit.best || a.fit.best->status != veq::fit::FitStatus::converged) continue;
    ++fitted;
    if (a.fit.usable()) ++usable;
    const chem::AnalyteInfo* info = chem::find_analyte(sys.analyte);
    auto tally = [&](const std::string& name, double truth, bool relative) {
      const veq::fit::Parameter* p = a.fit.best->parameter(name);
      if (p == nullptr) return;
      const double err = relative ? std::fabs(p->value / truth - 1.0) : std::fabs(p->value - truth);
      for (Tally* t : {&by_param[std::string(sys.analyte) + " " + name], relative ? &c_all : &pKa_all, &all}) {
        t->abs_error.push_back(err);
        if (p->ci95_low && p->ci95_high) {
          ++t->intervals;
          if (*p->ci95_low <= truth && truth <= *p->ci95_high) ++t->covered;
        }
      }
    };
    tally("c", conc, true);
    for (std::size_t j = 0; j < info->pKa_25C.size(); ++j)
      tally("pKa" + std::to_string(j + 1), info->pKa_25C[j], false);
  }

  std::printf(
      "veq fit accuracy: %d simulated runs of %d readings, noise %.3f pH (Davies, 25 °C, V0 25 mL, 0.1 mol/L "
      "titrant),\n",
      kRuns,
      kPoints,
      kNoise);
  std::printf("50 each of acetic acid, phosphoric acid (NaOH), ammonia, sodium carbonate (HCl); the model named.\n\n");
  std::printf("converged %d/%d, passing every check (usable) %d/%d; median time per analyze() %.2f ms\n\n",
              fitted,
              kRuns,
              usable,
              kRuns,
              median(fit_ms));
  std::printf("%-28s %14s %12s\n", "parameter", "median |error|", "95% coverage");
  for (const auto& [name, t] : by_param) {
    const bool rel = name.size() > 2 && name.compare(name.size() - 2, 2, " c") == 0;
    std::printf("%-28s %13.4g%s %8d/%d\n",
                name.c_str(),
                median(t.abs_error) * (rel ? 100.0 : 1.0),
                rel ? "%" : " ",
                t.covered,
                t.intervals);
  }
  std::printf("\nall pKa values:         median |dpKa| = %.4f            (target < 0.01)\n", median(pKa_all.abs_error));
  std::printf("all concentrations:     median |dc|/c = %.4f %%           (target < 0.1 %%)\n",
              100.0 * median(c_all.abs_error));
  std::printf("all parameters:         95 %% intervals cover the truth in %.1f %% (%d/%d)  (target 90-98 %%)\n",
              all.intervals ? 100.0 * all.covered / all.intervals : 0.0,
              all.covered,
              all.intervals);
  std::printf(
      "model selection (no --model): the simulated chemistry chosen in %d/%d runs by BIC (the default), "
      "%d/%d by AICc; AICc's other choices:\n",
      selected_right_bic,
      kRuns,
      selected_right,
      kRuns);
  for (const auto& [what, n] : wrong_choices) std::printf("  %3d x %s\n", n, what.c_str());
  return 0;
}
