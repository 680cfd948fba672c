// SPDX-License-Identifier: MIT
// The readable summary of one run for a terminal.
#pragma once

#include <optional>
#include <string>

#include "veq/analyze.hpp"

namespace veq::report {

// Run id, readings, each endpoint as volume ± uncertainty with its pH (or mV)
// and the derivative estimates, flags and warnings; ends with the short caution.
[[nodiscard]] std::string to_text(const Analysis& analysis);

// A specification as a lab writes it: "6.5 to 8.0", "≥ 6.5", "≤ 400" (both
// limits with the decimals the finer one needs, at most max_decimals); "" for none.
[[nodiscard]] std::string spec_text(const std::optional<double>& low,
                                    const std::optional<double>& high,
                                    int max_decimals);

// The one-paragraph caution shown wherever veq gives guidance.
[[nodiscard]] const char* safety_caution();

}  // namespace veq::report
