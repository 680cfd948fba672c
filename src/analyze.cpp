// SPDX-License-Identifier: MIT
// The pipeline for one run: prepare, endpoints, indicators (later stages join here).
#include "veq/analyze.hpp"

namespace veq {

std::vector<std::string> AnalyzeOptions::validate() const {
  std::vector<std::string> all = prepare.validate();
  for (auto& p : endpoints.validate()) all.push_back(std::move(p));
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
  a.indicators = indicators::assess(a.curve, a.endpoints, options.indicators);
  a.warnings = run.warnings;
  a.warnings.insert(a.warnings.end(), a.curve.warnings.begin(), a.curve.warnings.end());
  a.warnings.insert(a.warnings.end(), a.endpoints.warnings.begin(), a.endpoints.warnings.end());
  a.warnings.insert(a.warnings.end(), a.indicators.warnings.begin(), a.indicators.warnings.end());
  a.run = std::move(run);
  return a;
}

std::string version() { return VEQ_VERSION; }

}  // namespace veq
