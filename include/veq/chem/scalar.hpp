// SPDX-License-Identifier: MIT
// Helpers that let the chemistry templates take double or an automatic-differentiation scalar.
#pragma once

#include <type_traits>

namespace veq::chem {

// The plain value of a scalar: the number itself for double, the value part
// for a forward-mode dual number (any type with a public member `a`, which is
// how Ceres' Jet stores its value; the header does not depend on Ceres).
template <typename T>
[[nodiscard]] constexpr double value_of(const T& v) {
  if constexpr (std::is_arithmetic_v<T>) {
    return static_cast<double>(v);
  } else {
    return value_of(v.a);
  }
}

// Converts between scalar types: double -> T keeps the value with zero
// derivatives, T -> double drops the derivatives, T -> T copies.
template <typename To, typename From>
[[nodiscard]] constexpr To scalar_cast(const From& v) {
  if constexpr (std::is_same_v<To, From>) {
    return v;
  } else if constexpr (std::is_arithmetic_v<To>) {
    return static_cast<To>(value_of(v));
  } else {
    return To(value_of(v));
  }
}

}  // namespace veq::chem
