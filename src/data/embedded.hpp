// SPDX-License-Identifier: MIT
// Data tables embedded at build time from src/data/ (see src/CMakeLists.txt).
#pragma once

#include <optional>
#include <string_view>

namespace veq::data {

// The text of src/data/<name> as it was when veq was built, or nullopt when no
// such table was embedded. name is the file name, e.g. "indicators.tsv".
[[nodiscard]] std::optional<std::string_view> embedded(std::string_view name);

}  // namespace veq::data
