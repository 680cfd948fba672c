// SPDX-License-Identifier: MIT
// The machine-readable result of one run: JSON with a versioned schema.
#pragma once

#include <string>

#include "veq/analyze.hpp"

namespace veq::report {

// Schema identifier written as "schema"; bumped on any incompatible change.
inline constexpr const char* kRunSchema = "veq.run/1";

// The run's result as JSON (documented in the README, "Result files"),
// indented by 2, ending in a newline. Same analysis, same bytes. Volumes are
// rounded to 1e-6 mL, pH to 1e-4, mV to 1e-3; no NaN or infinity is written.
[[nodiscard]] std::string to_json(const Analysis& analysis);

}  // namespace veq::report
