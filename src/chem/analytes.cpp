// SPDX-License-Identifier: MIT
// Reading the embedded analyte table once, and looking substances up by name.
#include "veq/chem/analytes.hpp"

#include <cctype>
#include <cstdlib>
#include <stdexcept>

#include "data/embedded.hpp"
#include "veq/core/error.hpp"

namespace veq::chem {
namespace {

std::string_view trim(std::string_view s) {
  while (!s.empty() && (s.front() == ' ' || s.front() == '\r')) s.remove_prefix(1);
  while (!s.empty() && (s.back() == ' ' || s.back() == '\r')) s.remove_suffix(1);
  return s;
}

std::vector<std::string_view> split(std::string_view s, char sep) {
  std::vector<std::string_view> out;
  std::size_t start = 0;
  while (true) {
    const std::size_t p = s.find(sep, start);
    out.push_back(trim(s.substr(start, p == std::string_view::npos ? std::string_view::npos : p - start)));
    if (p == std::string_view::npos) break;
    start = p + 1;
  }
  return out;
}

std::string lower(std::string_view s) {
  std::string out;
  out.reserve(s.size());
  for (char c : trim(s)) out.push_back(static_cast<char>(std::tolower(static_cast<unsigned char>(c))));
  return out;
}

// The table is part of veq: a malformed row is a bug, not a user's input error.
[[noreturn]] void bad_row(std::size_t line, const std::string& what) {
  throw std::logic_error("src/data/analytes.tsv:" + std::to_string(line) + ": " + what);
}

std::vector<double> numbers(std::string_view field, std::size_t line) {
  std::vector<double> out;
  if (field == "-" || field.empty()) return out;
  for (std::string_view part : split(field, ',')) {
    const std::string text(part);
    char* end = nullptr;
    const double v = std::strtod(text.c_str(), &end);
    if (text.empty() || end != text.c_str() + text.size()) bad_row(line, "'" + text + "' is not a number");
    out.push_back(v);
  }
  return out;
}

int integer(std::string_view field, std::size_t line) {
  const std::string text(field);
  char* end = nullptr;
  const long v = std::strtol(text.c_str(), &end, 10);
  if (text.empty() || end != text.c_str() + text.size()) bad_row(line, "'" + text + "' is not an integer");
  return static_cast<int>(v);
}

std::vector<AnalyteInfo> parse_table(std::string_view text) {
  std::vector<AnalyteInfo> rows;
  std::size_t line_no = 0;
  bool header = true;
  for (std::string_view line : split(text, '\n')) {
    ++line_no;
    if (line.empty() || line.front() == '#') continue;
    const auto f = split(line, '\t');
    if (f.size() != 9) bad_row(line_no, "expected 9 tab-separated fields, found " + std::to_string(f.size()));
    if (header) {
      if (f[0] != "name" || f[6] != "pKa") bad_row(line_no, "unexpected header");
      header = false;
      continue;
    }
    AnalyteInfo a;
    a.name = std::string(f[0]);
    a.formula = std::string(f[1]);
    if (!f[2].empty()) {
      for (std::string_view alias : split(f[2], ',')) a.aliases.emplace_back(alias);
    }
    if (f[3] == "weak")
      a.kind = AnalyteKind::weak;
    else if (f[3] == "strong_acid")
      a.kind = AnalyteKind::strong_acid;
    else if (f[3] == "strong_base")
      a.kind = AnalyteKind::strong_base;
    else
      bad_row(line_no, "unknown kind '" + std::string(f[3]) + "'");
    a.top_charge = integer(f[4], line_no);
    a.added_form = integer(f[5], line_no);
    a.pKa_25C = numbers(f[6], line_no);
    a.dpKa_dT_per_K = numbers(f[7], line_no);
    a.source = std::string(f[8]);
    if (a.kind == AnalyteKind::weak) {
      if (a.pKa_25C.empty() || a.pKa_25C.size() > static_cast<std::size_t>(kMaxSteps))
        bad_row(line_no, "a weak analyte needs 1-4 pKa values");
      if (a.added_form < 0 || a.added_form > static_cast<int>(a.pKa_25C.size())) bad_row(line_no, "bad added_form");
      if (!a.dpKa_dT_per_K.empty() && a.dpKa_dT_per_K.size() != a.pKa_25C.size())
        bad_row(line_no, "dpKa_dT needs one value per pKa");
    }
    if (a.source.empty()) bad_row(line_no, "every row needs a source");
    rows.push_back(std::move(a));
  }
  return rows;
}

}  // namespace

const std::vector<AnalyteInfo>& analyte_table() {
  static const std::vector<AnalyteInfo> table = [] {
    const auto text = data::embedded("analytes.tsv");
    if (!text) throw std::logic_error("analytes.tsv was not embedded at build time");
    return parse_table(*text);
  }();
  return table;
}

const AnalyteInfo* find_analyte(std::string_view name) {
  const std::string key = lower(name);
  if (key.empty()) return nullptr;
  for (const auto& a : analyte_table()) {
    if (lower(a.name) == key || lower(a.formula) == key) return &a;
    for (const auto& alias : a.aliases) {
      if (lower(alias) == key) return &a;
    }
  }
  return nullptr;
}

Analyte analyte(std::string_view name, double conc_mol_L) {
  const AnalyteInfo* info = find_analyte(name);
  if (info == nullptr) {
    std::string known;
    for (const auto& a : analyte_table()) known += (known.empty() ? "" : ", ") + a.name;
    throw InputError({"analyte", 0, 0},
                     "'" + std::string(name) + "' is not in the analyte table",
                     "known substances: " + known + "; or give pKa values for a weak acid or base");
  }
  Analyte a;
  a.name = info->name;
  a.kind = info->kind;
  a.conc_mol_L = conc_mol_L;
  a.pKa_25C = info->pKa_25C;
  a.dpKa_dT_per_K = info->dpKa_dT_per_K;
  a.top_charge = info->top_charge;
  a.added_form = info->added_form;
  return a;
}

}  // namespace veq::chem
