// SPDX-License-Identifier: MIT
// Tolerance helpers: relative with an absolute floor, named so that each test says what it allows.
#pragma once

#include <cmath>

#include <catch2/catch.hpp>

namespace veq::test {

// |actual - expected| <= max(abs_tol, rel_tol * |expected|)
inline Catch::Detail::Approx close(double expected, double rel_tol, double abs_tol = 0.0) {
  return Catch::Detail::Approx(expected).epsilon(rel_tol).margin(abs_tol);
}

}  // namespace veq::test
