// SPDX-License-Identifier: MIT
// Endpoints from the first-derivative maximum and the second-derivative zero crossing.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "veq/core/run.hpp"
#include "veq/signal/derivatives.hpp"

namespace veq::signal {

struct EndpointOptions {
  // Readings per derivative window (even, >= 2); 0 chooses from the data
  // (see auto_window).
  int window_points = 0;
  // A derivative peak is an endpoint only if its height is at least this
  // fraction of the highest peak of the run [-].
  double min_relative_height = 0.05;
  // ... and it stands out of the valleys on both sides by at least this
  // fraction of its own height (prominence / height) [-].
  double min_prominence = 0.5;
  // ... and both its height and its prominence are at least this many SDs of
  // the derivative noise [-].
  double min_snr = 8.0;
  // ... and it lies at least this far from a higher accepted peak [mL];
  // 0: three times the run's median volume step.
  double min_separation_mL = 0.0;
  // At most this many endpoints are reported, the highest peaks first [-].
  int max_endpoints = 8;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// Quality flags of an endpoint (stable strings, used in JSON and tests).
inline constexpr const char* kFlagEdge = "edge";              // too few readings beyond it
inline constexpr const char* kFlagFewPoints = "few_points";   // it falls in a gap of the dosing
inline constexpr const char* kFlagNoisy = "noisy";            // weak beside the noise, or methods disagree

struct Endpoint {
  int index = 0;                 // 1-based, in order of volume
  double volume_mL = 0.0;        // the endpoint volume reported: the consensus of the methods [mL]
  double uncertainty_mL = 0.0;   // standard uncertainty of volume_mL [mL]
  double derivative_volume_mL = 0.0;       // mean of the two derivative estimates [mL]
  double derivative_uncertainty_mL = 0.0;  // its standard uncertainty [mL]
  std::vector<std::string> consensus_methods = {"derivative"};  // estimates combined into volume_mL
  std::vector<std::string> consensus_left_out;                  // estimates left out (flagged or disagreeing)
  double value = 0.0;            // pH (or mV) at the endpoint [pH] or [mV]
  std::string value_method;      // "local_model" or "interpolated"
  std::optional<double> first_derivative_mL;   // vertex of the dy/dV peak [mL]
  std::optional<double> second_derivative_mL;  // zero crossing of d2y/dV2 [mL]
  double peak_slope = 0.0;       // |dy/dV| at the peak [unit/mL]
  double snr = 0.0;              // peak_slope / its noise SD [-]
  std::vector<std::string> flags;
};

struct EndpointResult {
  std::vector<Endpoint> endpoints;
  Derivatives derivatives;       // what the endpoints were found on (spikes left out)
  double min_separation_mL = 0.0;
  std::vector<Diagnostic> warnings;
};

// Finds every endpoint of the curve by the documented acceptance rule
// (EndpointOptions). The endpoint volume is the mean of the first- and
// second-derivative estimates; its uncertainty combines their disagreement,
// the local dosing step and the reading noise. Never throws on curve content:
// a curve without endpoints gives an empty list and a warning.
[[nodiscard]] EndpointResult find_endpoints(const Curve& curve, const EndpointOptions& options = {},
                                            const std::string& file = {});

}  // namespace veq::signal
