// SPDX-License-Identifier: MIT
// The pipeline for one run: prepare, derivative endpoints, Gran and consensus, indicators, results.
#include "veq/analyze.hpp"

#include <fmt/format.h>

#include <algorithm>

#include "veq/chem/analytes.hpp"

namespace veq {
namespace {

// The charge-balance fit's options for this run: a standardisation method
// supplies the standard's amount (mass x purity / molar mass, for the titrant
// factor) and, when the analyte table knows the standard, its chemistry.
fit::FitOptions fit_options_for(const AnalyzeOptions& options, const Run& run) {
  fit::FitOptions fo = options.fit;
  if (!options.method || !options.method->standardisation) return fo;
  const method::Method& m = *options.method;
  const std::optional<double> mass = m.standard_mass_g ? m.standard_mass_g : run.facts.sample_mass_g;
  if (!fo.standard_amount_mmol && mass && m.standard_molar_mass_g_mol && *m.standard_molar_mass_g_mol > 0) {
    fo.standard_amount_mmol = 1000.0 * *mass * m.standard_purity / *m.standard_molar_mass_g_mol;
  }
  if (fo.model.empty() && !m.standard_name.empty() && chem::find_analyte(m.standard_name) != nullptr) {
    fo.model = m.standard_name;
  }
  return fo;
}

// The sample volume and titrant concentration the chemistry stages use: what a method states wins over
// the file's metadata (the command line has already overridden the method), and a method's titer factor
// applies. A standardisation determines the titrant, so its nominal concentration stays.
struct UsedFacts {
  std::optional<double> sample_volume_mL;
  std::optional<double> titrant_conc_mol_L;
};
UsedFacts used_facts(const AnalyzeOptions& options, const Run& run) {
  UsedFacts u{run.facts.sample_volume_mL, run.facts.titrant_conc_mol_L};
  if (!options.method) return u;
  const method::Method& m = *options.method;
  if (m.sample_volume_mL) u.sample_volume_mL = m.sample_volume_mL;
  if (!m.standardisation) {
    if (m.titrant_conc_mol_L) u.titrant_conc_mol_L = m.titrant_conc_mol_L;
    if (u.titrant_conc_mol_L) *u.titrant_conc_mol_L *= m.titer;
  }
  return u;
}

}  // namespace

std::vector<std::string> AnalyzeOptions::validate() const {
  std::vector<std::string> all = prepare.validate();
  for (auto& p : endpoints.validate()) all.push_back(std::move(p));
  for (auto& p : gran.validate()) all.push_back(std::move(p));
  for (auto& p : indicators.validate()) all.push_back(std::move(p));
  for (auto& p : fit.validate()) all.push_back(std::move(p));
  return all;
}

Analysis analyze(Run run, const AnalyzeOptions& options) {
  if (const auto problems = options.validate(); !problems.empty()) {
    throw InputError({"options", 0, 0}, problems.front());
  }
  Analysis a;
  a.curve = signal::prepare(run, options.prepare);
  a.endpoints = signal::find_endpoints(a.curve, options.endpoints, run.source);
  a.warnings = run.warnings;
  a.warnings.insert(a.warnings.end(), a.curve.warnings.begin(), a.curve.warnings.end());
  a.warnings.insert(a.warnings.end(), a.endpoints.warnings.begin(), a.endpoints.warnings.end());

  const UsedFacts used = used_facts(options, run);
  a.used_sample_volume_mL = used.sample_volume_mL;
  a.used_titrant_conc_mol_L = used.titrant_conc_mol_L;
  signal::GranInputs gi;
  gi.sample_volume_mL = used.sample_volume_mL;
  gi.titrant_conc_mol_L = used.titrant_conc_mol_L;
  gi.temperature_C = a.curve.temperature_C;
  signal::GranOptions gran = options.gran;
  if (!gran.analyte_charge && options.method && options.method->analyte_charge) {
    gran.analyte_charge = options.method->analyte_charge;  // the method says what the analyte is
  }
  a.gran = signal::gran_endpoints(a.curve, a.endpoints.endpoints, gi, gran, a.warnings, run.source);
  // The consensus of derivative and Gran estimates; the fit starts from it.
  for (std::size_t i = 0; i < a.endpoints.endpoints.size(); ++i) {
    signal::Endpoint& e = a.endpoints.endpoints[i];
    const signal::Consensus c = signal::consensus(e, a.gran[i]);
    e.volume_mL = c.volume_mL;
    e.uncertainty_mL = c.uncertainty_mL;
  }
  fit::FitInputs fi;
  fi.sample_volume_mL = used.sample_volume_mL.value_or(0.0);
  fi.titrant_conc_mol_L = used.titrant_conc_mol_L.value_or(0.0);
  fi.titrant = run.facts.titrant_kind;
  fi.temperature_C = a.curve.temperature_C;
  const fit::FitOptions fo = fit_options_for(options, run);
  a.fit = fit::fit_titration(a.curve, fi, a.endpoints.endpoints, a.gran, fo);
  // Sodium hydroxide takes up CO2 from the air: a base-titrant fit that does not describe the readings is
  // tried once more with the titrant's carbonate fraction free, and kept when that one passes its checks.
  const bool base_titrant =
      fi.titrant == TitrantKind::base || (fi.titrant == TitrantKind::unknown && a.curve.signal == SignalKind::ph &&
                                          !a.curve.converted_from_mv && a.curve.direction > 0);
  if (a.fit.best && !a.fit.usable() && !fo.fit_carbonate && base_titrant) {
    fit::FitOptions with_co2 = fo;
    with_co2.fit_carbonate = true;
    fit::FitResult second = fit::fit_titration(a.curve, fi, a.endpoints.endpoints, a.gran, with_co2);
    if (second.usable()) {
      const fit::Parameter* f = second.best->parameter("carbonate_fraction");
      second.warnings.push_back(
          {"titrant_carbonate",
           fmt::format("the fit describes the readings only with carbonate in the titrant ({:.1f} % of its hydroxide "
                       "turned to carbonate): the base has taken up CO2; restandardise it or protect it from air",
                       f != nullptr ? 100.0 * f->value : 0.0),
           {}});
      a.fit = std::move(second);
    }
  }
  for (auto& w : a.fit.warnings) {
    if (w.where.file.empty()) w.where.file = run.source;
  }
  a.warnings.insert(a.warnings.end(), a.fit.warnings.begin(), a.fit.warnings.end());
  // A usable fit's equivalence volume joins the consensus of the endpoint it matches.
  std::vector<std::optional<method::FittedVolume>> fitted(a.endpoints.endpoints.size());
  if (a.fit.usable()) {
    for (const auto& fe : a.fit.best->equivalence) {
      if (fe.endpoint_index < 1 || !fe.uncertainty_mL) continue;
      const auto i = static_cast<std::size_t>(fe.endpoint_index - 1);
      if (i < fitted.size()) fitted[i] = method::FittedVolume{fe.volume_mL, *fe.uncertainty_mL};
    }
  }
  for (std::size_t i = 0; i < a.endpoints.endpoints.size(); ++i) {
    signal::Endpoint& e = a.endpoints.endpoints[i];
    const signal::GranEndpoint& g = a.gran[i];
    std::optional<signal::VolumeEstimate> f;
    if (fitted[i]) f = signal::VolumeEstimate{fitted[i]->volume_mL, fitted[i]->uncertainty_mL};
    const signal::Consensus c = signal::consensus(e, g, f);
    e.volume_mL = c.volume_mL;
    e.uncertainty_mL = c.uncertainty_mL;
    e.consensus_methods = c.methods;
    e.consensus_left_out = c.left_out;
    if (c.disagree) e.flags.emplace_back(signal::kFlagMethodsDisagree);
    // A Gran line that is not straight (never part of the consensus) flags the endpoint when nothing but the
    // derivative and the other Gran line then stand behind it; beside a usable fit it changes nothing, and it
    // is still shown with its own "not straight" note (activity bends a buffer line even on perfect data).
    const bool with_fit = std::find(c.methods.begin(), c.methods.end(), "fit") != c.methods.end();
    if (!with_fit && ((g.before && !g.before->linear) || (g.after && !g.after->linear)))
      e.flags.emplace_back(signal::kFlagGranNonlinear);
  }
  // Indicators judge the consensus endpoint volumes, on the fitted model's curve when the fit is usable
  // (for a run in mV without calibration the model also gives the endpoint's pH).
  if (a.fit.usable()) {
    const indicators::PhCurve model = fit::fitted_curve(*a.fit.best, a.curve);
    signal::EndpointResult at_pH = a.endpoints;
    if (a.curve.signal != SignalKind::ph) {
      for (auto& e : at_pH.endpoints) e.value = model.pH_at_mL(e.volume_mL);
    }
    a.indicators = indicators::assess(model, at_pH, options.indicators);
  } else {
    a.indicators = indicators::assess(a.curve, a.endpoints, options.indicators);
  }
  a.warnings.insert(a.warnings.end(), a.indicators.warnings.begin(), a.indicators.warnings.end());
  if (options.method) {
    // A method the run cannot satisfy fails the results, never the endpoints.
    try {
      a.results = method::compute_results(*options.method, run, a.curve, a.endpoints.endpoints, a.gran, fitted);
      for (const auto& c : a.results->conflicts) {
        a.warnings.push_back({"method_conflict", "method and run disagree: " + c, {run.source, 0, 0}});
      }
      for (const auto& f : a.results->acceptance_failures) {
        a.warnings.push_back({"acceptance", "method acceptance: " + f, {run.source, 0, 0}});
      }
    } catch (const InputError& e) {
      a.results_error = e.what();
      a.warnings.push_back({"result_failed", std::string("no result: ") + e.what(), {run.source, 0, 0}});
    }
  }
  a.run = std::move(run);
  return a;
}

std::string version() {
  return VEQ_VERSION;
}

}  // namespace veq
