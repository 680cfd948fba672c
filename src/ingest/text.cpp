// SPDX-License-Identifier: MIT
// Field splitting and exact number parsing (fast_float) for ingest.
#include "ingest/text.hpp"

#include <fast_float/fast_float.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <cstring>

namespace veq::ingest::detail {

std::string_view trim(std::string_view s) {
  std::size_t b = 0, e = s.size();
  while (b < e && (s[b] == ' ' || s[b] == '\t')) ++b;
  while (e > b && (s[e - 1] == ' ' || s[e - 1] == '\t')) --e;
  return s.substr(b, e - b);
}

bool is_blank(std::string_view s) {
  for (char c : s) {
    if (c != ' ' && c != '\t' && c != '\f' && c != '\v') return false;
  }
  return true;
}

void split_fields(std::string_view line, char sep, std::vector<Field>& out) {
  out.clear();
  const std::size_t n = line.size();
  std::size_t i = 0;
  auto is_ws = [](char c) { return c == ' ' || c == '\t'; };
  if (sep == kWhitespace) {
    while (i < n) {
      while (i < n && is_ws(line[i])) ++i;
      if (i >= n) break;
      const std::size_t start = i;
      if (line[i] == '"') {
        std::size_t j = i + 1;
        while (j < n && !(line[j] == '"' && (j + 1 >= n || line[j + 1] != '"'))) j += (line[j] == '"') ? 2 : 1;
        out.push_back({line.substr(i + 1, std::min(j, n) - i - 1), true, start + 1});
        i = j + 1;
        while (i < n && !is_ws(line[i])) ++i;
      } else {
        while (i < n && !is_ws(line[i])) ++i;
        out.push_back({line.substr(start, i - start), false, start + 1});
      }
    }
    return;
  }
  while (true) {
    std::size_t b = i;
    while (b < n && is_ws(line[b]) && line[b] != sep) ++b;
    if (b < n && line[b] == '"') {
      std::size_t j = b + 1;
      while (j < n && !(line[j] == '"' && (j + 1 >= n || line[j + 1] != '"'))) j += (line[j] == '"') ? 2 : 1;
      Field f{line.substr(b + 1, std::min(j, n) - b - 1), true, b + 1};
      std::size_t k = std::min(j + 1, n);
      while (k < n && line[k] != sep) ++k;
      out.push_back(f);
      if (k >= n) break;
      i = k + 1;
    } else {
      std::size_t k = b;
      while (k < n && line[k] != sep) ++k;
      out.push_back({trim(line.substr(b, k - b)), false, b + 1});
      if (k >= n) break;
      i = k + 1;
    }
  }
  while (!out.empty() && out.back().text.empty() && !out.back().quoted) out.pop_back();
}

NumberStatus parse_number(std::string_view text, char decimal, double& out, int* decimals) {
  text = trim(text);
  if (text.empty()) return NumberStatus::empty;
  if (text.front() == '+') text.remove_prefix(1);
  if (text.empty() || text.size() > 64) return NumberStatus::not_a_number;
  // A decimal-comma number whose thousands are grouped by points ("12.500,0"): the points dropped when the
  // first group has 1 to 3 digits and every later one 3 (common practice in decimal-comma locales, no
  // source). Anything else with a point stays not a number there.
  std::array<char, 64> ungrouped{};
  if (decimal == ',' && text.find('.') != std::string_view::npos) {
    const std::size_t lead = text.front() == '-' ? 1 : 0;
    const std::size_t end = std::min(text.find_first_of(",eE"), text.size());
    std::size_t n = 0, group = 0, groups = 0;
    bool ok = end > lead;
    for (std::size_t i = 0; i < lead; ++i) ungrouped[n++] = text[i];
    for (std::size_t i = lead; i < end && ok; ++i) {
      const char c = text[i];
      if (c == '.') {
        ok = (groups == 0 ? group >= 1 && group <= 3 : group == 3);
        ++groups;
        group = 0;
      } else if (c >= '0' && c <= '9') {
        ungrouped[n++] = c;
        ++group;
      } else {
        ok = false;
      }
    }
    ok = ok && groups > 0 && group == 3;
    if (!ok) return NumberStatus::not_a_number;
    for (std::size_t i = end; i < text.size(); ++i) ungrouped[n++] = text[i];
    text = std::string_view(ungrouped.data(), n);
  }
  std::array<char, 64> buf{};
  std::memcpy(buf.data(), text.data(), text.size());
  int dec_pos = -1;
  bool exponent = false;
  for (std::size_t i = 0; i < text.size(); ++i) {
    char& c = buf[i];
    if (c == ',') {
      if (decimal != ',' || dec_pos >= 0) return NumberStatus::not_a_number;
      c = '.';
      dec_pos = static_cast<int>(i);
    } else if (c == '.') {
      if (decimal != '.' || dec_pos >= 0) return NumberStatus::not_a_number;
      dec_pos = static_cast<int>(i);
    } else if (c == 'e' || c == 'E') {
      exponent = true;
    }
  }
  const char* first = buf.data();
  const char* last = buf.data() + text.size();
  double value = 0.0;
  const auto result = fast_float::from_chars(first, last, value);
  if (result.ptr != last) return NumberStatus::not_a_number;
  if (result.ec != std::errc() || !std::isfinite(value)) return NumberStatus::not_finite;
  // fast_float accepts "nan" and "inf": those are numbers, but not finite ones.
  out = value;
  if (decimals != nullptr) {
    if (exponent)
      *decimals = -1;
    else
      *decimals = dec_pos < 0 ? 0 : static_cast<int>(text.size()) - dec_pos - 1;
  }
  return NumberStatus::ok;
}

std::string normalize_label(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (std::size_t i = 0; i < s.size(); ++i) {
    const auto c = static_cast<unsigned char>(s[i]);
    if (c < 0x80) {
      out.push_back(static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c));
      continue;
    }
    const auto next = i + 1 < s.size() ? static_cast<unsigned char>(s[i + 1]) : 0;
    if (c == 0xC2 && (next == 0xB5)) {
      out.push_back('u');
      ++i;
      continue;
    }  // µ micro sign
    if (c == 0xCE && (next == 0xBC)) {
      out.push_back('u');
      ++i;
      continue;
    }  // μ Greek mu
    if (c == 0xC2 && (next == 0xB0 || next == 0xBA)) {
      ++i;
      continue;
    }  // ° º
    if (c == 0xC2 && next == 0xB3) {
      out.push_back('3');
      ++i;
      continue;
    }  // ³
    if (c == 0xCE && next == 0x94) {
      out += "delta";
      ++i;
      continue;
    }  // Δ
    if (c == 0xCE && next == 0xB4) {
      out += "delta";
      ++i;
      continue;
    }                                                                                                     // δ
    if (c == 0xE2 && next == 0x84 && i + 2 < s.size() && static_cast<unsigned char>(s[i + 2]) == 0x83) {  // ℃
      out.push_back('c');
      i += 2;
      continue;
    }
    out.push_back(static_cast<char>(c));
  }
  return out;
}

std::string excerpt(std::string_view s, std::size_t max_chars) {
  std::string out;
  for (char c : s) {
    if (out.size() >= max_chars) {
      out += "...";
      break;
    }
    const auto u = static_cast<unsigned char>(c);
    out.push_back(u < 0x20 || u == 0x7F ? '?' : c);
  }
  return out;
}

}  // namespace veq::ingest::detail
