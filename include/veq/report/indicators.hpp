// SPDX-License-Identifier: MIT
// Renderings of the indicator table and of the manual cross-check, for a terminal and as JSON.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "veq/analyze.hpp"
#include "veq/indicators/crosscheck.hpp"
#include "veq/indicators/table.hpp"

namespace veq::report {

// The rows as a table for a terminal: name, pH range, pK(In), acid -> base
// colour (and the source of each row when with_sources). With pH [pH] given,
// the heading says that these are the rows bracketing it, closest midpoint
// first, and a column gives |midpoint - pH|. Ends with a note on ranges and
// the caution.
[[nodiscard]] std::string indicator_table_text(const std::vector<const indicators::Indicator*>& rows,
                                               std::optional<double> pH,
                                               bool with_sources);

// The cross-check for a terminal: prediction, scaling, difference, tolerance
// (naming ISO 385 / ASTM E287 for the default burette), "agrees" or
// "disagrees by X mL (Y %)" with the likelier cause, notes and the caution.
[[nodiscard]] std::string crosscheck_text(const indicators::CrosscheckResult& result);

// The run's JSON (see to_json(const Analysis&)) with a "crosscheck" object
// added (fields documented in the README). No NaN is written: missing
// numbers are null.
[[nodiscard]] std::string to_json(const Analysis& analysis, const indicators::CrosscheckResult& result);

}  // namespace veq::report
