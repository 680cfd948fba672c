// SPDX-License-Identifier: MIT
// Gran's linearisations: equivalence volumes from the steady readings before or after an endpoint.
#pragma once

#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "veq/core/run.hpp"
#include "veq/signal/endpoints.hpp"

namespace veq::signal {

// Which Gran function a branch was fitted with. For a base titrant (pH
// rising), with u the pH (or -E/s for an uncalibrated mV run):
//   excess_analyte  (V0 + V) 10^(-u)        strong acid before the endpoint
//   excess_titrant  (V0 + V) 10^(u - pKw)   any analyte after the last endpoint
//   buffer          (V - V_prev) 10^(-u)    weak acid (step k) before endpoint k
// and the mirror images for an acid titrant (10^(u - pKw) <-> 10^(-u)).
enum class GranFunction { excess_analyte, excess_titrant, buffer };
[[nodiscard]] std::string_view to_string(GranFunction f);  // "excess_analyte", ...

struct GranOptions {
  // --gran-window: fit only readings in [from, to] mL (the branch it falls
  // in: before the endpoint whose segment holds it, or after the last one).
  std::optional<std::pair<double, double>> window_mL;
  // Automatic window: readings whose fraction of the endpoint's segment,
  // f = (V - V_prev) / (V_eq - V_prev), lies in [before_from, before_to]
  // (excess analyte) or [before_from, buffer_to] (buffer) before the
  // endpoint, or in [1 + after_from, 1 + after_to] after the last one [-].
  double before_from = 0.10;
  double before_to = 0.97;
  double buffer_to = 0.90;
  double after_from = 0.03;
  double after_to = 1.0;
  // Fewest readings a Gran line may rest on [-].
  int min_points = 4;
  // A line whose intercept lies further than this fraction of the segment
  // from the derivative endpoint does not describe the branch [-].
  double max_offset = 0.10;
  // Correct the Gran functions and the pKa for activity (Davies) when the
  // ionic strength is known: the titrant concentration is known and the
  // analyte's charge is stated (analyte_charge) [-].
  bool activity_correction = true;
  // Charge of the analyte form present at the start: 0 for a neutral acid
  // HA or base B, -1 for hydrogen phthalate, -2 for carbonate. Unset: not
  // known, so no activity correction (classic Gran; mixed pKa) [-].
  std::optional<int> analyte_charge;
  // Ionic strength of a background electrolyte, added to the estimate [mol/L].
  double background_ionic_strength_mol_L = 0.0;

  [[nodiscard]] std::vector<std::string> validate() const;
};

// One Gran line and what it gives.
struct GranBranch {
  GranFunction function = GranFunction::excess_analyte;
  bool after = false;              // fitted after the endpoint (excess titrant)
  double volume_mL = 0.0;          // x-intercept: the equivalence volume [mL]
  double uncertainty_mL = 0.0;     // its standard error from the slope/intercept covariance [mL]
  double window_from_mL = 0.0;     // readings used lie in [from, to] [mL]
  double window_to_mL = 0.0;
  int points = 0;
  double r2 = 0.0;                 // weighted coefficient of determination [-]
  double reduced_chi2 = 0.0;       // weighted residual variance over its expectation from the noise [-]
  bool linear = true;              // false: no window passed the linearity rule (best one kept, flagged)
  std::optional<double> pKa;       // from a buffer slope [-]
  std::optional<double> pKa_std_error;
  bool pKa_activity_corrected = false;
  std::optional<double> ionic_strength_mol_L;  // used for the correction
  std::vector<std::pair<double, double>> line_points;  // (V, G scaled) of the readings used, for plots
  double slope = 0.0;              // of the scaled G against V
  double intercept = 0.0;
};

// Gran results for one endpoint: the branch before it (and, for the last
// endpoint, the branch after it), each when it could be fitted.
struct GranEndpoint {
  std::optional<GranBranch> before;
  std::optional<GranBranch> after;
};

// What Gran needs beyond the curve. Without the sample volume the whole Gran
// result is skipped with a warning (never guessed).
struct GranInputs {
  std::optional<double> sample_volume_mL;    // V0 [mL]
  std::optional<double> titrant_conc_mol_L;  // Ct [mol/L], for the ionic strength
  double temperature_C = 25.0;
};

// Fits Gran lines for each preliminary (derivative) endpoint. Returns one
// entry per endpoint, in order; warnings explain every branch skipped.
[[nodiscard]] std::vector<GranEndpoint> gran_endpoints(const Curve& curve,
                                                       const std::vector<Endpoint>& endpoints,
                                                       const GranInputs& inputs,
                                                       const GranOptions& options,
                                                       std::vector<Diagnostic>& warnings,
                                                       const std::string& file = {});

// Consensus of the methods for one endpoint, combined into its volume_mL and
// uncertainty_mL (rule in DEVELOPERS.md, "Consensus endpoint").
struct Consensus {
  double volume_mL = 0.0;
  double uncertainty_mL = 0.0;
  std::vector<std::string> methods;  // the estimates that entered: "derivative", "gran_before", "gran_after", "fit"
  std::vector<std::string> left_out; // estimates left out: flagged, or disagreeing with the reference
  bool disagree = false;             // the estimates kept scatter beyond twice their uncertainties
};
inline constexpr const char* kFlagMethodsDisagree = "methods_disagree";
inline constexpr const char* kFlagGranNonlinear = "gran_nonlinear";

// An estimate of an endpoint volume from outside the signal stage (the
// charge-balance fit's equivalence volume).
struct VolumeEstimate {
  double volume_mL = 0.0;
  double uncertainty_mL = 0.0;  // standard uncertainty [mL]
};

// The derivative estimate is taken from derivative.derivative_volume_mL
// (with its uncertainty), so the consensus can be recomputed once a fit is
// known; fitted joins the estimates when given.
[[nodiscard]] Consensus consensus(const Endpoint& derivative,
                                  const GranEndpoint& gran,
                                  const std::optional<VolumeEstimate>& fitted = std::nullopt);

}  // namespace veq::signal
