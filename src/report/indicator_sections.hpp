// SPDX-License-Identifier: MIT
// The indicator parts of the run reports, kept apart so that json.cpp and text.cpp need one call each.
#pragma once

#include <nlohmann/json.hpp>
#include <string>

#include "veq/analyze.hpp"

namespace veq::report::detail {

// Sets endpoint_json["indicators"] (one object per candidate indicator) and
// endpoint_json["indicators_also_suitable"] for the endpoint with this index.
void add_endpoint_indicators(nlohmann::ordered_json& endpoint_json, const Analysis& analysis, int endpoint_index);

// "    Indicators: ...\n" for the endpoint with this index: the best
// candidates with verdict and error, and what else is suitable; empty when
// the run was not judged (mV without calibration).
[[nodiscard]] std::string endpoint_indicators_line(const Analysis& analysis, int endpoint_index);

}  // namespace veq::report::detail
