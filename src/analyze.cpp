// SPDX-License-Identifier: MIT
// The pipeline for one run: prepare, derivative endpoints, Gran and consensus, indicators, results.
#include "veq/analyze.hpp"

namespace veq {

std::vector<std::string> AnalyzeOptions::validate() const {
  std::vector<std::string> all = prepare.validate();
  for (auto& p : endpoints.validate()) all.push_back(std::move(p));
  for (auto& p : gran.validate()) all.push_back(std::move(p));
  for (auto& p : indicators.validate()) all.push_back(std::move(p));
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

  signal::GranInputs gi;
  gi.sample_volume_mL = run.facts.sample_volume_mL;
  gi.titrant_conc_mol_L = run.facts.titrant_conc_mol_L;
  gi.temperature_C = a.curve.temperature_C;
  signal::GranOptions gran = options.gran;
  if (!gran.analyte_charge && options.method && options.method->analyte_charge) {
    gran.analyte_charge = options.method->analyte_charge;  // the method says what the analyte is
  }
  a.gran = signal::gran_endpoints(a.curve, a.endpoints.endpoints, gi, gran, a.warnings, run.source);
  for (std::size_t i = 0; i < a.endpoints.endpoints.size(); ++i) {
    signal::Endpoint& e = a.endpoints.endpoints[i];
    const signal::GranEndpoint& g = a.gran[i];
    const signal::Consensus c = signal::consensus(e, g);
    e.volume_mL = c.volume_mL;
    e.uncertainty_mL = c.uncertainty_mL;
    e.consensus_methods = c.methods;
    if (c.disagree) e.flags.emplace_back(signal::kFlagMethodsDisagree);
    if ((g.before && !g.before->linear) || (g.after && !g.after->linear)) e.flags.emplace_back(signal::kFlagGranNonlinear);
  }
  // Indicators judge the consensus endpoint volumes.
  a.indicators = indicators::assess(a.curve, a.endpoints, options.indicators);
  a.warnings.insert(a.warnings.end(), a.indicators.warnings.begin(), a.indicators.warnings.end());
  if (options.method) {
    // A method the run cannot satisfy fails the results, never the endpoints.
    try {
      a.results = method::compute_results(*options.method, run, a.curve, a.endpoints.endpoints, a.gran);
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

std::string version() { return VEQ_VERSION; }

}  // namespace veq
