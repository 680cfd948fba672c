// SPDX-License-Identifier: MIT
// Splitting lines into fields and parsing numbers with '.' or ',' decimals.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

namespace veq::ingest::detail {

// A field of a split line. text has surrounding spaces and quotes removed;
// column is the 1-based byte column where the field starts in the line.
struct Field {
  std::string_view text;
  bool quoted = false;
  std::size_t column = 1;
};

// The separator for runs of spaces and tabs.
inline constexpr char kWhitespace = ' ';

// Splits line at sep (kWhitespace: any run of spaces/tabs). Double-quoted
// fields may contain the separator. Trailing empty fields (trailing
// separators) are dropped. out is cleared first.
void split_fields(std::string_view line, char sep, std::vector<Field>& out);

enum class NumberStatus { ok, empty, not_a_number, not_finite };

// Parses a whole field as a number, '.' or ',' as the decimal mark. Leading
// '+' is accepted; anything left over (units, thousands marks) is not.
// decimals receives the count of digits after the decimal mark (-1 when
// written with an exponent).
[[nodiscard]] NumberStatus parse_number(std::string_view text, char decimal, double& out,
                                        int* decimals = nullptr);

[[nodiscard]] std::string_view trim(std::string_view s);
[[nodiscard]] bool is_blank(std::string_view s);

// Lower-case ASCII, with µ/μ -> u, degree and ordinal signs removed,
// superscript 3 -> 3, Greek capital delta -> "delta".
[[nodiscard]] std::string normalize_label(std::string_view s);

// Printable excerpt of a user's text for messages: at most max_chars, with
// control characters shown as '?'.
[[nodiscard]] std::string excerpt(std::string_view s, std::size_t max_chars = 40);

}  // namespace veq::ingest::detail
