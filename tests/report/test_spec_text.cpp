// SPDX-License-Identifier: MIT
// How a specification is written in the text and HTML reports.
#include <catch2/catch.hpp>

#include "veq/report/text.hpp"

// Common practice, no source: a range is written with both limits at the same decimals
// ("6.5 to 8.0 g/L"), a one-sided limit with its sign, and no digits the limit does not have.
TEST_CASE("spec_text: both limits at the decimals the finer one needs", "[report][spec]") {
  CHECK(veq::report::spec_text(6.5, 8.0, 3) == "6.5 to 8.0");
  CHECK(veq::report::spec_text(3.2, 3.65, 3) == "3.20 to 3.65");
  CHECK(veq::report::spec_text(std::nullopt, 400.0, 1) == "\xE2\x89\xA4 400");
  CHECK(veq::report::spec_text(0.126, std::nullopt, 2) == "\xE2\x89\xA5 0.13");  // capped at the result's decimals
  CHECK(veq::report::spec_text(std::nullopt, std::nullopt, 2).empty());
}
