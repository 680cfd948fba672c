// SPDX-License-Identifier: MIT
// A value or the InputError that explains why there is none (C++20 has no std::expected).
#pragma once

#include <cassert>
#include <utility>
#include <variant>

#include "veq/core/error.hpp"

namespace veq {

template <typename T>
class [[nodiscard]] Expected {
 public:
  Expected(T value) : m_state(std::move(value)) {}            // NOLINT: implicit on purpose
  Expected(InputError error) : m_state(std::move(error)) {}   // NOLINT: implicit on purpose

  [[nodiscard]] bool has_value() const { return m_state.index() == 0; }
  explicit operator bool() const { return has_value(); }

  // Precondition: has_value().
  [[nodiscard]] const T& value() const& {
    assert(has_value());
    return std::get<0>(m_state);
  }
  [[nodiscard]] T&& value() && {
    assert(has_value());
    return std::get<0>(std::move(m_state));
  }
  // Precondition: !has_value().
  [[nodiscard]] const InputError& error() const {
    assert(!has_value());
    return std::get<1>(m_state);
  }
  // The value, or throws the error: for callers that let errors travel up.
  [[nodiscard]] T value_or_throw() && {
    if (!has_value()) throw std::get<1>(m_state);
    return std::get<0>(std::move(m_state));
  }

 private:
  std::variant<T, InputError> m_state;
};

}  // namespace veq
