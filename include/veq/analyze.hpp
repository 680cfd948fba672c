// SPDX-License-Identifier: MIT
// The whole pipeline for one run: the one entry point every front end calls.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "veq/core/run.hpp"
#include "veq/fit/fit.hpp"
#include "veq/indicators/colour_change.hpp"
#include "veq/method/method.hpp"
#include "veq/method/result.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/gran.hpp"
#include "veq/signal/prepare.hpp"

namespace veq {

struct AnalyzeOptions {
  signal::PrepareOptions prepare;
  signal::EndpointOptions endpoints;
  signal::GranOptions gran;
  indicators::IndicatorOptions indicators;
  // The charge-balance fit (run when the sample volume and titrant
  // concentration are known; skipped with a warning otherwise).
  fit::FitOptions fit;
  // A method turns endpoints into reportable results (none: endpoints only).
  std::optional<method::Method> method;

  // Problems of all the stage options, one line each; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// Everything known about one run after analysis; reports are rendered from this.
struct Analysis {
  Run run;
  Curve curve;
  signal::EndpointResult endpoints;          // volume_mL of each is the consensus of its methods
  std::vector<signal::GranEndpoint> gran;    // one per endpoint (empty branches when skipped)
  fit::FitResult fit;                        // the charge-balance fit (status not_run when skipped)
  indicators::IndicatorResult indicators;    // per endpoint: indicators that change colour there
  std::optional<method::ResultSet> results;  // when a method was given
  std::string results_error;                 // why the method's results could not be computed ("" if they were)
  std::vector<Diagnostic> warnings;          // run, curve, endpoint, Gran, fit and indicator warnings, in that order
  // The sample volume [mL] and titrant concentration [mol/L, titer applied] Gran and the fit used: the
  // method's when it states them, else the run's.
  std::optional<double> used_sample_volume_mL;
  std::optional<double> used_titrant_conc_mol_L;
};

// Runs prepare, derivative endpoints, Gran, the charge-balance fit, the
// consensus and the indicator check on a run read by ingest. Never throws
// for curve content (no endpoint is a warning); throws InputError only for
// invalid options.
[[nodiscard]] Analysis analyze(Run run, const AnalyzeOptions& options = {});

// The veq version that produced a result ("0.1.0").
[[nodiscard]] std::string version();

}  // namespace veq
