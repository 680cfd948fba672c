// SPDX-License-Identifier: MIT
// A strict RFC 4180 reader for the tests: records of fields, quoted fields with doubled quotes, CRLF.
#pragma once

#include <stdexcept>
#include <string>
#include <string_view>
#include <vector>

namespace veq::test {

// Parses text by RFC 4180 §2 (records end in CRLF; a field is either plain, holding no comma, quote,
// CR or LF, or enclosed in double quotes with inner quotes doubled). Throws std::runtime_error on
// anything else, so a malformed file fails the test.
inline std::vector<std::vector<std::string>> parse_csv(std::string_view text) {
  std::vector<std::vector<std::string>> rows;
  std::vector<std::string> row;
  std::string field;
  std::size_t i = 0;
  auto fail = [&](const char* what) { throw std::runtime_error(std::string(what) + " at byte " + std::to_string(i)); };
  while (i < text.size()) {
    field.clear();
    if (text[i] == '"') {
      ++i;
      for (;;) {
        if (i >= text.size()) fail("unterminated quoted field");
        if (text[i] == '"') {
          if (i + 1 < text.size() && text[i + 1] == '"') {
            field += '"';
            i += 2;
            continue;
          }
          ++i;
          break;
        }
        field += text[i++];
      }
    } else {
      while (i < text.size() && text[i] != ',' && text[i] != '\r' && text[i] != '\n') {
        if (text[i] == '"') fail("quote inside an unquoted field");
        field += text[i++];
      }
    }
    row.push_back(field);
    if (i < text.size() && text[i] == ',') {
      ++i;
      continue;
    }
    if (text.substr(i, 2) != "\r\n") fail("record not ended by CRLF");
    i += 2;
    rows.push_back(row);
    row.clear();
  }
  if (!row.empty()) fail("last record not ended by CRLF");
  return rows;
}

}  // namespace veq::test
