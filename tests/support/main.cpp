// SPDX-License-Identifier: MIT
// Catch2 main for the veq test suite.
#define CATCH_CONFIG_MAIN
#include <catch2/catch.hpp>
