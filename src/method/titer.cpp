// SPDX-License-Identifier: MIT
// Titer files (TOML): written after a standardisation, referenced by later methods.
#include "veq/method/titer.hpp"

#include <cmath>
#include <fstream>
#include <sstream>

#include <fmt/format.h>

#include <toml++/toml.h>

#include "veq/core/error.hpp"

namespace veq::method {
namespace {

std::string quoted(const std::string& s) {
  std::string out = "\"";
  for (char c : s) {
    if (c == '"' || c == '\\') out.push_back('\\'), out.push_back(c);
    else if (static_cast<unsigned char>(c) < 0x20) out += fmt::format("\\u{:04x}", static_cast<unsigned char>(c));
    else out.push_back(c);
  }
  return out + "\"";
}

}  // namespace

std::string titer_to_toml(const TiterRecord& t) {
  std::string out = "# veq titer record: the standardised concentration of a titrant.\n"
                    "# Reference it from a method with: [titrant] titer_file = \"<this file>\"\n";
  out += "titrant = " + quoted(t.titrant) + "\n";
  out += fmt::format("concentration_mol_L = {:.6g}\n", t.concentration_mol_L);
  out += fmt::format("uncertainty_mol_L = {:.3g}\n", t.uncertainty_mol_L);
  if (t.nominal_mol_L > 0) {
    out += fmt::format("nominal_mol_L = {:.6g}\n", t.nominal_mol_L);
    out += fmt::format("titer = {:.5f}\n", t.concentration_mol_L / t.nominal_mol_L);
  }
  out += "standard = " + quoted(t.standard) + "\n";
  out += "source_run = " + quoted(t.source_run) + "\n";
  out += "date = " + quoted(t.date) + "\n";
  out += "veq_version = " + quoted(t.veq_version) + "\n";
  return out;
}

TiterRecord load_titer(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError({path.string(), 0, 0}, "cannot open the titer file", "run the standardisation with --titer-out first");
  std::ostringstream ss;
  ss << in.rdbuf();
  toml::table t;
  try {
    t = toml::parse(ss.str(), path.string());
  } catch (const toml::parse_error& e) {
    throw InputError({path.string(), e.source().begin.line, e.source().begin.column},
                     std::string("not a valid titer file: ") + std::string(e.description()));
  }
  TiterRecord r;
  auto num = [&](const char* key, bool required) -> double {
    const toml::node* n = t.get(key);
    if (n == nullptr) {
      if (required) throw InputError({path.string(), 1, 0}, std::string("missing key '") + key + "' in the titer file");
      return 0.0;
    }
    const auto v = n->value<double>();
    if (!v || !(*v >= 0) || !std::isfinite(*v)) {
      throw InputError({path.string(), n->source().begin.line, 0}, std::string("'") + key + "' must be a number of 0 or more");
    }
    return *v;
  };
  r.concentration_mol_L = num("concentration_mol_L", true);
  if (!(r.concentration_mol_L > 0)) throw InputError({path.string(), 1, 0}, "'concentration_mol_L' must be positive");
  r.uncertainty_mol_L = num("uncertainty_mol_L", true);
  r.nominal_mol_L = num("nominal_mol_L", false);
  r.titrant = t["titrant"].value_or(std::string());
  r.standard = t["standard"].value_or(std::string());
  r.source_run = t["source_run"].value_or(std::string());
  r.date = t["date"].value_or(std::string());
  r.veq_version = t["veq_version"].value_or(std::string());
  return r;
}

}  // namespace veq::method
