// SPDX-License-Identifier: MIT
// Include after any Ceres header: Ceres brings glog, whose CHECK macro (abort on failure) replaces Catch's.
#pragma once

#include <catch2/catch.hpp>

// Catch's own definition of CHECK (catch.hpp, v2), restored.
#undef CHECK
#define CHECK(...) INTERNAL_CATCH_TEST("CHECK", Catch::ResultDisposition::ContinueOnFailure, __VA_ARGS__)
