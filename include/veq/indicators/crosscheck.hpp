// SPDX-License-Identifier: MIT
// The manual cross-check: does a colour-indicator titration agree with a pH-meter run of the same sample?
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "veq/core/run.hpp"
#include "veq/indicators/colour_change.hpp"
#include "veq/signal/endpoints.hpp"

namespace veq::indicators {

// Tolerance of a Class A 50 mL burette [mL] (ISO 385; ASTM E287).
inline constexpr double kClassA50mLBuretteTolerance_mL = 0.05;

struct CrosscheckOptions {
  // Glassware tolerance of the manual titration [mL]; default a Class A 50 mL
  // burette (ISO 385; ASTM E287). The manual result agrees when
  // |manual - predicted| <= burette_tolerance_mL + indicator.drop_volume_mL.
  double burette_tolerance_mL = kClassA50mLBuretteTolerance_mL;
  // Drop volume, tolerance and "seen" rule for judging the indicator.
  IndicatorOptions indicator;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// What the manual titration gave.
struct ManualTitration {
  std::string indicator;                   // indicator name as typed (see IndicatorTable::find)
  double volume_mL = 0.0;                  // titrant used to the colour change [mL]
  std::optional<double> sample_volume_mL;  // its sample [mL]; empty: the run's sample size
};

// Why a manual result disagrees, as far as one result can tell.
enum class LikelyCause {
  none,                // it agrees
  indicator,           // it lies within the indicator's colour change, or at the equivalence point
  reading_or_titrant,  // it lies outside the whole colour change: burette reading, sample or titrant
};
[[nodiscard]] std::string_view to_string(LikelyCause cause);  // "none", "indicator", "reading_or_titrant"

struct CrosscheckResult {
  Indicator indicator;
  double manual_volume_mL = 0.0;                  // [mL]
  std::optional<double> manual_sample_volume_mL;  // [mL]
  std::optional<double> run_sample_volume_mL;     // [mL]
  double scale = 1.0;                             // manual sample / run sample [-]; 1 when not given
  double run_seen_mL = 0.0;                       // where the colour change is seen in the run [mL]
  std::optional<double> run_begin_mL;             // where the whole change begins in the run [mL]
  std::optional<double> run_end_mL;               // and where it ends [mL]
  double predicted_mL = 0.0;                      // run_seen_mL * scale [mL]
  double prediction_uncertainty_mL = 0.0;         // standard uncertainty of predicted_mL from the readings [mL]
  double difference_mL = 0.0;                     // manual - predicted [mL]
  double difference_percent = 0.0;                // 100 * difference / predicted [%]
  double tolerance_mL = 0.0;                      // burette tolerance + one drop [mL]
  double burette_tolerance_mL = 0.0;              // [mL]
  double drop_volume_mL = 0.0;                    // [mL]
  bool agrees = false;                            // |difference| <= tolerance
  LikelyCause likely_cause = LikelyCause::none;
  std::optional<ColourChange> change;              // the indicator judged against the nearest endpoint
  std::optional<int> endpoint_index;               // that endpoint (1-based)
  std::optional<double> predicted_equivalence_mL;  // its volume scaled to the manual sample [mL]
  std::string statement;                           // "agrees" or "disagrees by X mL (Y %)"
  std::string explanation;                         // one or two sentences on the cause
  std::vector<std::string> notes;                  // assumptions made (same sample size, ...)
  std::string curve_method = "interpolated";       // where the change was placed: "interpolated" or "model"
};

// Predicts from a measured curve (run: its source and facts) where the named indicator's colour change
// would have been seen, scaled to the manual sample (manual sample volume /
// run sample volume, from run.facts), and compares it with the manual volume.
// Throws veq::InputError for an unknown indicator (naming close matches), a
// manual volume that is not positive, a manual sample volume given while the
// run's sample volume is unknown (naming that missing fact), a run in mV
// without calibration, or an indicator whose colour change the run never
// reaches.
// model: the fitted model's pH curve when the fit passed its checks (fit::fitted_curve): the colour
// change is then placed on it, as `veq analyze` judges the indicators, with the nearest endpoint's
// uncertainty as the prediction's; null places it on the readings.
[[nodiscard]] CrosscheckResult crosscheck(const Run& run,
                                          const Curve& curve,
                                          const signal::EndpointResult& endpoints,
                                          const ManualTitration& manual,
                                          const CrosscheckOptions& options = {},
                                          const IndicatorTable& table = IndicatorTable::builtin(),
                                          const PhCurve* model = nullptr);

}  // namespace veq::indicators
