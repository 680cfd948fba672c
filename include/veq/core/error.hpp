// SPDX-License-Identifier: MIT
// The one error type for problems in a user's input, and warnings that carry a location.
#pragma once

#include <cstddef>
#include <stdexcept>
#include <string>

namespace veq {

// Where in a user's file something was found. line and column are 1-based;
// 0 means "not known" (for example a problem with the whole file).
struct SourceLocation {
  std::string file;
  std::size_t line = 0;
  std::size_t column = 0;
};

// "file:line:col" with the unknown parts left out ("file:line", "file").
[[nodiscard]] std::string to_string(const SourceLocation& where);

// Anything wrong with a user's file, option or method. what() is
// "file:line:col: message"; hint() says what to do about it (may be empty).
// Internal errors are not InputErrors: they are bugs and are reported as such.
class InputError : public std::runtime_error {
 public:
  InputError(SourceLocation where, std::string message, std::string hint = {});

  [[nodiscard]] const SourceLocation& where() const { return m_where; }
  [[nodiscard]] const std::string& message() const { return m_message; }
  [[nodiscard]] const std::string& hint() const { return m_hint; }

 private:
  SourceLocation m_where;
  std::string m_message;
  std::string m_hint;
};

// A non-fatal finding about a run: the answer is still given, but a reader
// should know. code is a stable snake_case identifier (used in JSON and
// tests), message is for people.
struct Diagnostic {
  std::string code;
  std::string message;
  SourceLocation where;
};

// "file:line: message" for a terminal.
[[nodiscard]] std::string to_string(const Diagnostic& d);

}  // namespace veq
