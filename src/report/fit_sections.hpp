// SPDX-License-Identifier: MIT
// The charge-balance fit parts of the run reports, kept apart so that json.cpp and text.cpp need one call each.
#pragma once

#include <nlohmann/json.hpp>
#include <optional>
#include <string>

#include "veq/analyze.hpp"

namespace veq::report::detail {

// Decimals that show a parameter to two significant digits of its standard error (four significant
// digits of the value when there is none).
[[nodiscard]] int parameter_decimals(const std::optional<double>& std_error, double value);

// ", set aside: ..." for a candidate model selection passed over (fit::ModelScore::set_aside), or empty.
[[nodiscard]] std::string set_aside_text(const std::string& set_aside);

// The "fit" object of the run's JSON (README, "Result files"). Always
// present; a fit that was not run or failed says so in status and flags.
[[nodiscard]] nlohmann::ordered_json fit_json(const Analysis& analysis);

// Sets methods_json["fit"] {volume_mL, uncertainty_mL} for the endpoint with
// this index when a usable fit matched it.
void add_endpoint_fit(nlohmann::ordered_json& methods_json, const Analysis& analysis, int endpoint_index);

// "      Fit: V ± u mL (model)\n" for the endpoint with this index, or empty.
[[nodiscard]] std::string endpoint_fit_line(const Analysis& analysis, int endpoint_index);

// The fit's paragraph of the terminal summary: model, parameters with
// standard errors and 95 % intervals, residual SD, runner-up, flags.
[[nodiscard]] std::string fit_block(const Analysis& analysis);

}  // namespace veq::report::detail
