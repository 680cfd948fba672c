// SPDX-License-Identifier: MIT
// Parsing the indicator table and looking rows up by name.
#include "veq/indicators/table.hpp"

#include <fast_float/fast_float.h>
#include <fmt/format.h>

#include <algorithm>
#include <array>
#include <cmath>
#include <set>

#include "data/embedded.hpp"
#include "veq/core/error.hpp"

namespace veq::indicators {
namespace {

constexpr std::array<std::string_view, 10> kColumns = {
    "name", "aliases", "low_pH", "high_pH", "pK_In", "acid_colour", "acid_sRGB", "base_colour", "base_sRGB", "source"};

// The table's pH values must lie here; anything else is a typing error [pH].
constexpr double kMinTablePH = -1.0;
constexpr double kMaxTablePH = 15.0;

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

std::vector<std::string_view> split(std::string_view line, char sep) {
  std::vector<std::string_view> out;
  std::size_t start = 0;
  for (;;) {
    const std::size_t at = line.find(sep, start);
    out.push_back(line.substr(start, at == std::string_view::npos ? std::string_view::npos : at - start));
    if (at == std::string_view::npos) break;
    start = at + 1;
  }
  return out;
}

struct Cursor {
  const std::string& file;
  std::size_t line;
  std::vector<std::size_t> column_start;  // 1-based column of each field

  [[noreturn]] void fail(std::size_t field, const std::string& message, const std::string& hint = {}) const {
    throw InputError({file, line, field < column_start.size() ? column_start[field] : 0}, message, hint);
  }
};

double parse_pH(const Cursor& at, std::size_t field, std::string_view text) {
  const std::string_view t = trim(text);
  double value = 0.0;
  const auto res = fast_float::from_chars(t.data(), t.data() + t.size(), value);
  if (t.empty() || res.ec != std::errc() || res.ptr != t.data() + t.size() || !std::isfinite(value)) {
    at.fail(field,
            fmt::format("{} '{}' is not a number", kColumns[field], t),
            "write a decimal number with a '.' decimal point, e.g. 8.2");
  }
  if (value < kMinTablePH || value > kMaxTablePH) {
    at.fail(field, fmt::format("{} {} is outside {}..{}", kColumns[field], value, kMinTablePH, kMaxTablePH));
  }
  return value;
}

std::string parse_hex(const Cursor& at, std::size_t field, std::string_view text) {
  std::string t(trim(text));
  const bool ok = t.size() == 7 && t[0] == '#' && std::all_of(t.begin() + 1, t.end(), [](char c) {
                    return (c >= '0' && c <= '9') || (c >= 'a' && c <= 'f') || (c >= 'A' && c <= 'F');
                  });
  if (!ok) at.fail(field, fmt::format("{} '{}' is not an sRGB colour #RRGGBB", kColumns[field], t));
  std::transform(t.begin(), t.end(), t.begin(), [](char c) { return c >= 'a' && c <= 'f' ? char(c - 32) : c; });
  return t;
}

std::string required_text(const Cursor& at, std::size_t field, std::string_view text) {
  const std::string_view t = trim(text);
  if (t.empty()) at.fail(field, fmt::format("{} is empty", kColumns[field]));
  return std::string(t);
}

// Levenshtein distance of two short strings.
std::size_t edit_distance(std::string_view a, std::string_view b) {
  std::vector<std::size_t> prev(b.size() + 1), cur(b.size() + 1);
  for (std::size_t j = 0; j <= b.size(); ++j) prev[j] = j;
  for (std::size_t i = 1; i <= a.size(); ++i) {
    cur[0] = i;
    for (std::size_t j = 1; j <= b.size(); ++j) {
      cur[j] = std::min({prev[j] + 1, cur[j - 1] + 1, prev[j - 1] + (a[i - 1] == b[j - 1] ? 0u : 1u)});
    }
    std::swap(prev, cur);
  }
  return prev[b.size()];
}

// Every normalised name a row answers to.
std::vector<std::string> keys_of(const Indicator& row) {
  std::vector<std::string> keys{normalise_name(row.name)};
  for (const auto& a : row.aliases) keys.push_back(normalise_name(a));
  return keys;
}

std::string describe(const Indicator& row) {
  return fmt::format("{} (pH {:.1f}-{:.1f})", row.name, row.low_pH, row.high_pH);
}

}  // namespace

std::string normalise_name(std::string_view name) {
  std::string out;
  for (char c : name) {
    if (c >= 'A' && c <= 'Z')
      out.push_back(static_cast<char>(c - 'A' + 'a'));
    else if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9'))
      out.push_back(c);
  }
  return out;
}

IndicatorTable IndicatorTable::parse(std::string_view tsv, const std::string& source_name) {
  IndicatorTable table;
  std::set<std::string> seen_keys;
  bool header_seen = false;
  std::size_t line_no = 0;
  for (std::string_view rest = tsv; !rest.empty();) {
    const std::size_t nl = rest.find('\n');
    std::string_view line = rest.substr(0, nl);
    rest = nl == std::string_view::npos ? std::string_view{} : rest.substr(nl + 1);
    ++line_no;
    if (!line.empty() && line.back() == '\r') line.remove_suffix(1);
    if (trim(line).empty() || line.front() == '#') continue;
    const auto fields = split(line, '\t');
    Cursor at{source_name, line_no, {}};
    std::size_t col = 1;
    for (const auto& f : fields) {
      at.column_start.push_back(col);
      col += f.size() + 1;
    }
    if (!header_seen) {
      for (std::size_t i = 0; i < kColumns.size(); ++i) {
        if (i >= fields.size() || trim(fields[i]) != kColumns[i]) {
          at.fail(i,
                  fmt::format("header column {} is '{}', expected '{}'",
                              i + 1,
                              i < fields.size() ? trim(fields[i]) : "",
                              kColumns[i]),
                  "the header names the columns, tab-separated: name, aliases, low_pH, high_pH, pK_In, acid_colour, "
                  "acid_sRGB, base_colour, base_sRGB, source");
        }
      }
      header_seen = true;
      continue;
    }
    if (fields.size() != kColumns.size()) {
      at.fail(std::min(fields.size(), kColumns.size() - 1),
              fmt::format("row has {} tab-separated fields, expected {}", fields.size(), kColumns.size()));
    }
    Indicator row;
    row.name = required_text(at, 0, fields[0]);
    for (const auto alias : split(fields[1], '|')) {
      if (!trim(alias).empty()) row.aliases.emplace_back(trim(alias));
    }
    row.low_pH = parse_pH(at, 2, fields[2]);
    row.high_pH = parse_pH(at, 3, fields[3]);
    if (!(row.low_pH < row.high_pH)) {
      at.fail(3, fmt::format("high_pH {} is not above low_pH {}", row.high_pH, row.low_pH));
    }
    row.pK_In = parse_pH(at, 4, fields[4]);
    row.acid_colour = {required_text(at, 5, fields[5]), parse_hex(at, 6, fields[6])};
    row.base_colour = {required_text(at, 7, fields[7]), parse_hex(at, 8, fields[8])};
    row.source = required_text(at, 9, fields[9]);
    for (const auto& key : keys_of(row)) {
      if (key.empty()) at.fail(0, "a name or alias has no letters or digits");
      if (!seen_keys.insert(key).second) {
        at.fail(0, fmt::format("name or alias '{}' is used by an earlier row", key));
      }
    }
    table.m_rows.push_back(std::move(row));
  }
  if (!header_seen)
    throw InputError({source_name, 0, 0}, "no header line", "the first non-comment line names the columns");
  if (table.m_rows.empty()) throw InputError({source_name, 0, 0}, "the table has no rows");
  return table;
}

const IndicatorTable& IndicatorTable::builtin() {
  // Constant data, parsed once; a broken embedded table is a build defect and
  // surfaces as an InputError naming src/data/indicators.tsv.
  static const IndicatorTable table = [] {
    const auto text = data::embedded("indicators.tsv");
    if (!text) throw InputError({"src/data/indicators.tsv", 0, 0}, "indicator table was not embedded at build time");
    return parse(*text, "src/data/indicators.tsv");
  }();
  return table;
}

const Indicator& IndicatorTable::find(std::string_view name) const {
  const std::string key = normalise_name(name);
  if (!key.empty()) {
    for (const auto& row : m_rows) {
      for (const auto& k : keys_of(row)) {
        if (k == key) return row;
      }
    }
    std::vector<const Indicator*> prefixed;
    for (const auto& row : m_rows) {
      const auto keys = keys_of(row);
      if (std::any_of(keys.begin(), keys.end(), [&](const std::string& k) { return k.rfind(key, 0) == 0; })) {
        prefixed.push_back(&row);
      }
    }
    if (prefixed.size() == 1) return *prefixed.front();
    if (prefixed.size() > 1) {
      std::string list;
      for (const auto* row : prefixed) list += (list.empty() ? "" : ", ") + describe(*row);
      throw InputError({"--indicator", 0, 0},
                       fmt::format("'{}' matches {} rows of the indicator table: {}", name, prefixed.size(), list),
                       "name one of them, e.g. '" + prefixed.front()->name + "'");
    }
  }
  const auto close = close_matches(name);
  std::string list;
  for (const auto& c : close) list += (list.empty() ? "" : ", ") + c;
  throw InputError({"--indicator", 0, 0},
                   close.empty() ? fmt::format("'{}' is not in the indicator table", name)
                                 : fmt::format("'{}' is not in the indicator table; close matches: {}", name, list),
                   "'veq indicators' lists the table");
}

std::vector<std::string> IndicatorTable::close_matches(std::string_view name, std::size_t max_count) const {
  const std::string key = normalise_name(name);
  if (key.empty()) return {};
  struct Scored {
    std::size_t score;
    std::size_t order;
    const Indicator* row;
  };
  std::vector<Scored> scored;
  for (std::size_t i = 0; i < m_rows.size(); ++i) {
    std::size_t best = std::string::npos;
    for (const auto& k : keys_of(m_rows[i])) {
      std::size_t s;
      if (k.find(key) != std::string::npos || key.find(k) != std::string::npos) {
        s = 0;  // one contains the other: "blue" -> every "... blue"
      } else {
        // Compare with the name's start of the same length, so that a typo in
        // a prefix ("phenolphtalein") is close to the full name.
        const std::size_t d = std::min(edit_distance(key, k), edit_distance(key, k.substr(0, key.size())));
        if (d > std::max<std::size_t>(2, key.size() / 4)) continue;
        s = d;
      }
      best = std::min(best, s);
    }
    if (best != std::string::npos) scored.push_back({best, i, &m_rows[i]});
  }
  std::stable_sort(scored.begin(), scored.end(), [](const Scored& a, const Scored& b) { return a.score < b.score; });
  std::vector<std::string> out;
  for (const auto& s : scored) {
    if (out.size() >= max_count) break;
    out.push_back(s.row->name);
  }
  return out;
}

std::vector<const Indicator*> IndicatorTable::bracketing(double pH) const {
  std::vector<const Indicator*> out;
  for (const auto& row : m_rows) {
    if (row.brackets(pH)) out.push_back(&row);
  }
  std::stable_sort(out.begin(), out.end(), [pH](const Indicator* a, const Indicator* b) {
    return std::fabs(a->midpoint_pH() - pH) < std::fabs(b->midpoint_pH() - pH);
  });
  return out;
}

}  // namespace veq::indicators
