// SPDX-License-Identifier: MIT
// Formatting of input errors and diagnostics.
#include "veq/core/error.hpp"

#include <utility>

namespace veq {

std::string to_string(const SourceLocation& where) {
  std::string out = where.file.empty() ? std::string("<input>") : where.file;
  if (where.line > 0) {
    out += ':' + std::to_string(where.line);
    if (where.column > 0) out += ':' + std::to_string(where.column);
  }
  return out;
}

InputError::InputError(SourceLocation where, std::string message, std::string hint)
    : std::runtime_error(to_string(where) + ": " + message),
      m_where(std::move(where)),
      m_message(std::move(message)),
      m_hint(std::move(hint)) {}

std::string to_string(const Diagnostic& d) {
  if (d.where.file.empty() && d.where.line == 0) return d.message;
  return to_string(d.where) + ": " + d.message;
}

}  // namespace veq
