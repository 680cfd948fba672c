// SPDX-License-Identifier: MIT
// Where an indicator's colour change is seen on a titration curve, its indicator error and its verdict.
#pragma once

#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "veq/core/error.hpp"
#include "veq/core/run.hpp"
#include "veq/indicators/table.hpp"
#include "veq/signal/endpoints.hpp"

namespace veq::indicators {

// Which pH values bound the colour change (DEVELOPERS.md, Science, "Visual indicators").
enum class SeenRule {
  // The table's observed range, low_pH to high_pH.
  range_edge,
  // The ideal 10:1 rule: pK(In) - 1 to pK(In) + 1.
  pK_plus_minus_one,
};
[[nodiscard]] std::string_view to_string(SeenRule rule);  // "range_edge", "pK_plus_minus_one"

// How well an indicator marks an equivalence point.
enum class Verdict {
  suitable,                // |indicator error| within the tolerance
  usable_with_correction,  // beyond it, but sharp and small enough that a fixed correction holds
  unsuitable,              // neither, or its colour change is not seen in the run
};
[[nodiscard]] std::string_view to_string(Verdict verdict);  // "suitable", "usable_with_correction", "unsuitable"

struct IndicatorOptions {
  // Volume of one drop from the burette tip [mL]; about 20 drops per mL
  // (textbook figure; REFERENCES §10). Sets the drop floor of the tolerance
  // and the drop count of a colour change.
  double drop_volume_mL = 0.05;
  // An indicator is suitable when |error| <= max(max_error_percent,
  // 100 * drop_volume_mL / V_eq) [% of V_eq].
  double max_error_percent = 0.1;
  // Beyond that, usable with a correction when |error| <= this [% of V_eq]
  // and the colour change is sharp: span / sqrt(12) <= tolerance volume.
  double max_correctable_error_percent = 2.0;
  // Which pH values bound the colour change.
  SeenRule seen_rule = SeenRule::range_edge;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// A titration curve as pH against titrant volume, for locating colour
// changes: either the measured readings, interpolated, or (later) a fitted
// model. pH_at_mL must return a finite pH for every volume in
// [knots_mL.front(), knots_mL.back()]; crossings are bracketed between
// consecutive knots and then solved on pH_at_mL, so the knots must be close
// enough that the curve is monotonic between neighbours.
struct PhCurve {
  std::function<double(double)> pH_at_mL;  // pH at a titrant volume [mL] -> [pH]
  // A model's inverse, volume at a pH [pH] -> [mL], when it has a closed form (empty otherwise): a
  // crossing is then one evaluation instead of a root search; the root search checks it.
  std::function<double(double)> mL_at_pH;
  std::vector<double> knots_mL;  // ascending volumes [mL]
  std::vector<double> knots_pH;  // pH_at_mL at each knot when precomputed (same size), else empty [pH]
  int direction = +1;            // +1: pH rises with volume (base titrant); -1: falls (acid titrant)
  std::string method;            // "interpolated" or "model": reported with the results
  // false for readings: a crossing is only known to lie between the two
  // readings that bracket it, standard uncertainty (b - a)/sqrt(12)
  // (rectangular distribution, JCGM 100:2008 4.3.7); true for a model, whose
  // crossings are exact on it (its own uncertainty is the model's business).
  bool exact = false;
};

// The measured curve as a PhCurve: straight lines between readings, readings
// flagged as spikes left out. Precondition: curve.signal is pH.
[[nodiscard]] PhCurve interpolated_curve(const Curve& curve);

// The colour change of an indicator in a titration whose pH rises
// (direction > 0) or falls (direction < 0): it begins at begin_pH (the edge
// the titration reaches first), ends at end_pH, and is seen at seen_pH. For a
// two-colour indicator, and for a one-colour indicator whose colour appears,
// the change is seen where it begins; for a one-colour indicator whose colour
// vanishes (phenolphthalein titrated with an acid), where it ends.
struct Transition {
  double begin_pH = 0.0;     // [pH]
  double end_pH = 0.0;       // [pH]
  double seen_pH = 0.0;      // [pH]; equals begin_pH or end_pH
  bool seen_at_end = false;  // true when the change is seen as the colour vanishing
};
[[nodiscard]] Transition transition(const Indicator& indicator, int direction, SeenRule rule);

// Where a curve passes a pH in its direction.
enum class CrossingStatus {
  found,          // volume_mL holds the crossing
  past_at_start,  // the curve is already at or past the pH at its first volume
  not_reached,    // the curve ends before reaching the pH
};

struct Crossing {
  CrossingStatus status = CrossingStatus::not_reached;
  std::optional<double> volume_mL;  // set when status == found [mL]
  double bracket_low_mL = 0.0;      // the knots either side of it, when found [mL]
  double bracket_high_mL = 0.0;
};

// The volume at which the curve passes target_pH in its direction and stays
// past it: the last crossing from the near side (on a monotonic curve, the
// only one), solved between the bracketing knots. Never NaN: a crossing that
// does not exist has no volume and a status saying why.
[[nodiscard]] Crossing find_crossing(const PhCurve& curve, double target_pH);

// One indicator judged against one equivalence point.
struct ColourChange {
  Indicator indicator;
  Transition transition;                            // pH where the change begins, ends and is seen
  std::optional<double> seen_mL;                    // V_seen [mL]
  std::optional<double> seen_uncertainty_mL;        // standard uncertainty of V_seen from the readings [mL]
  std::optional<double> begin_mL;                   // where the change begins [mL]
  std::optional<double> end_mL;                     // where it ends [mL]
  double equivalence_mL = 0.0;                      // V_eq it is judged against [mL]
  std::optional<double> error_percent;              // (V_seen - V_eq) / V_eq * 100 [%]
  std::optional<double> error_uncertainty_percent;  // from u(V_seen) and u(V_eq) [%]
  std::optional<double> correction_mL;              // V_eq - V_seen: add to a titre read with this indicator [mL]
  std::optional<double> span_mL;                    // end_mL - begin_mL: the whole colour change [mL]
  std::optional<double> span_drops;                 // span_mL / drop volume [drops]
  double tolerance_percent = 0.0;                   // the suitability tolerance used [% of V_eq]
  Verdict verdict = Verdict::unsuitable;
  std::string note;  // why a number is missing or what limits the verdict; may be empty
};

// Judges indicator against the equivalence volume equivalence_mL [mL] (with
// standard uncertainty equivalence_uncertainty_mL [mL]) on curve, by the rule
// in options (see IndicatorOptions and DEVELOPERS.md). Numbers that cannot be
// had (the curve never reaches the indicator's pH) stay empty and note says
// why; the verdict is then unsuitable. Precondition: options.validate() is empty.
[[nodiscard]] ColourChange judge(const Indicator& indicator,
                                 const PhCurve& curve,
                                 double equivalence_mL,
                                 double equivalence_uncertainty_mL,
                                 const IndicatorOptions& options = {});

// The indicators for one endpoint.
struct EndpointIndicators {
  int endpoint_index = 0;                  // Endpoint::index (1-based)
  double equivalence_mL = 0.0;             // the endpoint volume [mL]
  std::optional<double> endpoint_pH;       // empty when the run is in mV without calibration
  std::vector<ColourChange> candidates;    // indicators whose range contains the endpoint pH, closest midpoint first
  std::vector<std::string> also_suitable;  // other rows of the table that are suitable too, table order
};

struct IndicatorResult {
  std::string curve_method;                   // "interpolated" or "model"; empty when nothing was judged
  std::vector<EndpointIndicators> endpoints;  // one per endpoint, in endpoint order
  std::vector<Diagnostic> warnings;
};

// Judges every table row against every endpoint of a curve: candidates are
// the rows whose range contains the endpoint pH; also_suitable lists the
// rest that are suitable anyway. A run in mV without calibration gives
// entries without candidates and a warning.
[[nodiscard]] IndicatorResult assess(const PhCurve& curve,
                                     const signal::EndpointResult& endpoints,
                                     const IndicatorOptions& options = {},
                                     const IndicatorTable& table = IndicatorTable::builtin());

// The same on the measured curve (interpolated_curve), or the warning for a mV run.
[[nodiscard]] IndicatorResult assess(const Curve& curve,
                                     const signal::EndpointResult& endpoints,
                                     const IndicatorOptions& options = {},
                                     const IndicatorTable& table = IndicatorTable::builtin());

// Fraction of the indicator in its base form at pH, [In-] / ([HIn] + [In-]) =
// 1 / (1 + 10^(pK_In - pH)) (Henderson-Hasselbalch). At pK_In +- 1 the minor
// form is one tenth of the major one: 1/11 and 10/11.
[[nodiscard]] double base_form_fraction(double pH, double pK_In);

}  // namespace veq::indicators
