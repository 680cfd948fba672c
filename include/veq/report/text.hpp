// SPDX-License-Identifier: MIT
// The readable summary of one run for a terminal.
#pragma once

#include <string>

#include "veq/analyze.hpp"

namespace veq::report {

// Run id, readings, each endpoint as volume ± uncertainty with its pH (or mV)
// and the derivative estimates, flags and warnings; ends with the short caution.
[[nodiscard]] std::string to_text(const Analysis& analysis);

// The one-paragraph caution shown wherever veq gives guidance.
[[nodiscard]] const char* safety_caution();

}  // namespace veq::report
