// SPDX-License-Identifier: MIT
// Method files (TOML, via toml++): strict reading with file:line errors naming the key.
#include "veq/method/method.hpp"

#include <fmt/format.h>
#include <toml++/toml.h>
#include <xxhash.h>

#include <algorithm>
#include <cmath>
#include <fstream>
#include <map>
#include <set>
#include <sstream>

#include "veq/core/error.hpp"
#include "veq/method/titer.hpp"

namespace veq::method {
namespace {

std::string squeeze(std::string_view s) {
  std::string out;
  for (char c : s) {
    if (c == ' ' || c == '\t' || c == '(' || c == ')' || c == '_' || c == '-') continue;
    out.push_back(static_cast<char>(c >= 'A' && c <= 'Z' ? c - 'A' + 'a' : c));
  }
  return out;
}

// Reads one table, remembering which keys were used so that the rest can be
// reported as unknown (a misspelt key must not be silently ignored).
class TableReader {
 public:
  TableReader(const toml::table& t, std::string name, std::string file, std::size_t line)
      : m_t(t), m_name(std::move(name)), m_file(std::move(file)), m_line(line) {}

  [[noreturn]] void fail(std::size_t line, const std::string& msg, const std::string& hint = {}) const {
    throw InputError({m_file, line, 0}, msg, hint);
  }
  [[nodiscard]] std::string where(std::string_view key) const {
    return m_name.empty() ? std::string(key) : m_name + "." + std::string(key);
  }
  [[nodiscard]] std::size_t line_of(std::string_view key) const {
    if (const toml::node* n = m_t.get(key)) return n->source().begin.line;
    return m_line;
  }
  [[nodiscard]] bool has(std::string_view key) {
    m_used.insert(std::string(key));
    return m_t.contains(key);
  }
  std::optional<double> number(std::string_view key) {
    m_used.insert(std::string(key));
    const toml::node* n = m_t.get(key);
    if (n == nullptr) return std::nullopt;
    if (auto v = n->value<double>()) {
      if (!std::isfinite(*v)) fail(n->source().begin.line, "'" + where(key) + "' must be a finite number");
      return *v;
    }
    fail(n->source().begin.line, "'" + where(key) + "' must be a number");
  }
  double positive(std::string_view key, double fallback) {
    const auto v = number(key);
    if (!v) return fallback;
    if (!(*v > 0)) fail(line_of(key), fmt::format("'{}' = {:g} must be positive", where(key), *v));
    return *v;
  }
  std::optional<double> positive(std::string_view key) {
    const auto v = number(key);
    if (v && !(*v > 0)) fail(line_of(key), fmt::format("'{}' = {:g} must be positive", where(key), *v));
    return v;
  }
  double non_negative(std::string_view key, double fallback) {
    const auto v = number(key);
    if (!v) return fallback;
    if (!(*v >= 0)) fail(line_of(key), fmt::format("'{}' = {:g} must not be negative", where(key), *v));
    return *v;
  }
  std::optional<std::string> text(std::string_view key) {
    m_used.insert(std::string(key));
    const toml::node* n = m_t.get(key);
    if (n == nullptr) return std::nullopt;
    if (auto v = n->value<std::string>()) return *v;
    fail(n->source().begin.line, "'" + where(key) + "' must be text in quotes");
  }
  // A standard uncertainty from either "<base>_uncertainty<suffix>" (standard
  // uncertainty) or "<base>_tolerance<suffix>" (a ± tolerance, rectangular: tol/sqrt(3)).
  double uncertainty(std::string_view base, std::string_view suffix) {
    const std::string u = std::string(base) + "_uncertainty" + std::string(suffix);
    const std::string t = std::string(base) + "_tolerance" + std::string(suffix);
    const double su = non_negative(u, -1.0);
    const double st = non_negative(t, -1.0);
    if (su >= 0 && st >= 0) fail(line_of(t), "give either '" + where(u) + "' or '" + where(t) + "', not both");
    if (su >= 0) return su;
    if (st >= 0) return st / std::sqrt(3.0);
    return 0.0;
  }
  void reject_unknown() const {
    for (auto&& [k, v] : m_t) {
      const std::string key(k.str());
      if (m_used.count(key) > 0) continue;
      // Suggest a known key: same letters ignoring case and underscores, else the same start.
      std::string near;
      for (const auto& u : m_used) {
        if (squeeze(u) == squeeze(key)) near = u;
      }
      for (const auto& u : m_used) {
        if (near.empty() && u.size() > 3 && key.rfind(u.substr(0, 4), 0) == 0) near = u;
      }
      fail(k.source().begin.line,
           "unknown key '" + where(key) + "'",
           near.empty() ? "see the README section \"Method files\" for the keys"
                        : "did you mean '" + where(near) + "'?");
    }
  }
  [[nodiscard]] const toml::table& table() const { return m_t; }

 private:
  const toml::table& m_t;
  std::string m_name;
  std::string m_file;
  std::size_t m_line;
  std::set<std::string> m_used;
};

VolumeSource source_from(const std::string& s, const TableReader& r, std::size_t line) {
  const std::string k = squeeze(s);
  if (k == "consensus") return VolumeSource::consensus;
  if (k == "derivative") return VolumeSource::derivative;
  if (k == "gran") return VolumeSource::gran;
  if (k == "fit") return VolumeSource::fit;
  r.fail(line, "'" + r.where("volume_from") + "' = '" + s + "': expected consensus, derivative, gran or fit");
}

std::string hash_hex(std::string_view bytes) {
  return fmt::format("{:016x}", XXH3_64bits(bytes.data(), bytes.size()));
}

}  // namespace

std::string_view to_string(ResultUnit u) {
  switch (u) {
    case ResultUnit::mol_L:
      return "mol/L";
    case ResultUnit::g_L:
      return "g/L";
    case ResultUnit::mg_L:
      return "mg/L";
    case ResultUnit::percent_w_w:
      return "% (w/w)";
    case ResultUnit::mg_L_CaCO3:
      return "mg/L as CaCO3";
    case ResultUnit::mg_KOH_per_g:
      return "mg KOH/g";
    case ResultUnit::titrant_mol_L:
      return "mol/L titrant";
  }
  return "mol/L";
}

std::optional<ResultUnit> unit_from_string(std::string_view text) {
  const std::string k = squeeze(text);
  if (k == "mol/l" || k == "m") return ResultUnit::mol_L;
  if (k == "g/l") return ResultUnit::g_L;
  if (k == "mg/l") return ResultUnit::mg_L;
  if (k == "%w/w" || k == "%" || k == "percent" || k == "%ww" || k == "%mass") return ResultUnit::percent_w_w;
  if (k == "mg/lascaco3" || k == "mg/lcaco3" || k == "mgcaco3/l") return ResultUnit::mg_L_CaCO3;
  if (k == "mgkoh/g") return ResultUnit::mg_KOH_per_g;
  if (k == "mol/ltitrant" || k == "titrantmol/l") return ResultUnit::titrant_mol_L;
  return std::nullopt;
}

std::string_view to_string(VolumeSource s) {
  switch (s) {
    case VolumeSource::consensus:
      return "consensus";
    case VolumeSource::derivative:
      return "derivative";
    case VolumeSource::gran:
      return "gran";
    case VolumeSource::fit:
      return "fit";
  }
  return "consensus";
}

Method parse_method(std::string_view text, const std::string& name, const std::filesystem::path& base_dir) {
  toml::table root;
  try {
    root = toml::parse(text, name);
  } catch (const toml::parse_error& e) {
    throw InputError({name, e.source().begin.line, e.source().begin.column},
                     std::string("not a valid TOML method file: ") + std::string(e.description()),
                     "method files are TOML; see the README section \"Method files\"");
  }
  Method m;
  m.path = name;
  m.identity = hash_hex(text);
  TableReader top(root, "", name, 1);
  auto sub = [&](std::string_view key) -> std::optional<TableReader> {
    (void)top.has(key);
    const toml::node* n = root.get(key);
    if (n == nullptr) return std::nullopt;
    const toml::table* t = n->as_table();
    if (t == nullptr)
      top.fail(n->source().begin.line, "'" + std::string(key) + "' must be a table ([" + std::string(key) + "])");
    return TableReader(*t, std::string(key), name, n->source().begin.line);
  };

  const auto method_name = top.text("name");
  if (!method_name || method_name->empty()) {
    top.fail(1, "missing key 'name'", "every method file starts with name = \"...\"");
  }
  m.name = *method_name;
  m.kind = top.text("kind").value_or("assay");

  if (auto a = sub("analyte")) {
    m.analyte = a->text("name").value_or("");
    m.molar_mass_g_mol = a->positive("molar_mass_g_mol");
    m.molar_mass_u_g_mol = a->uncertainty("molar_mass", "_g_mol");
    m.stoichiometry = a->positive("stoichiometry", 1.0);
    if (auto z = a->number("charge")) {
      if (*z != std::floor(*z) || *z < -4 || *z > 4) {
        a->fail(a->line_of("charge"), fmt::format("'analyte.charge' = {:g}: expected a whole number from -4 to 4", *z));
      }
      m.analyte_charge = static_cast<int>(*z);
    }
    a->reject_unknown();
  }
  if (auto s = sub("sample")) {
    m.sample_volume_mL = s->positive("volume_mL");
    m.sample_volume_u_mL = s->uncertainty("volume", "_mL");
    m.sample_mass_g = s->positive("mass_g");
    m.sample_mass_u_g = s->uncertainty("mass", "_g");
    s->reject_unknown();
  }
  if (auto t = sub("titrant")) {
    m.titrant_name = t->text("name").value_or("");
    m.titrant_conc_mol_L = t->positive("concentration_mol_L");
    m.titrant_conc_u_mol_L = t->uncertainty("concentration", "_mol_L");
    m.titer = t->positive("titer", 1.0);
    m.titer_u = t->non_negative("titer_uncertainty", 0.0);
    m.titrant_equivalents = t->positive("equivalents_per_mol", 1.0);
    if (auto f = t->text("titer_file")) {
      std::filesystem::path p(*f);
      if (p.is_relative() && !base_dir.empty()) p = base_dir / p;
      try {
        const TiterRecord rec = load_titer(p);
        if (m.titrant_conc_mol_L) {
          t->fail(t->line_of("titer_file"),
                  "give either 'titrant.concentration_mol_L' or 'titrant.titer_file', not both");
        }
        m.titrant_conc_mol_L = rec.concentration_mol_L;
        m.titrant_conc_u_mol_L = rec.uncertainty_mol_L;
        if (m.titrant_name.empty()) m.titrant_name = rec.titrant;
        m.titer_file = p.string();
        // The titer file is part of the method (its bytes, as the method file's): a restandardised
        // titrant redoes a batch's runs.
        std::ifstream tf(p, std::ios::binary);
        std::ostringstream bytes;
        bytes << tf.rdbuf();
        m.identity += "+titer:" + hash_hex(bytes.str());
      } catch (const InputError& e) {
        t->fail(t->line_of("titer_file"), "'titrant.titer_file': " + std::string(e.what()), e.hint());
      }
    }
    t->reject_unknown();
  }
  if (auto b = sub("blank")) {
    m.blank_mL = b->non_negative("volume_mL", 0.0);
    m.blank_u_mL = b->uncertainty("volume", "_mL");
    b->reject_unknown();
  }
  if (auto b = sub("burette")) {
    m.burette_tolerance_mL = b->non_negative("tolerance_mL", 0.05);
    b->reject_unknown();
  }
  if (auto s = sub("standard")) {
    m.standardisation = true;
    m.standard_name = s->text("name").value_or("");
    m.standard_mass_g = s->positive("mass_g");
    m.standard_mass_u_g = s->uncertainty("mass", "_g");
    double purity = s->positive("purity", 1.0);
    if (purity > 1.0 && purity <= 100.0) purity /= 100.0;  // written as a percentage
    if (purity > 1.0)
      s->fail(s->line_of("purity"),
              fmt::format("'standard.purity' = {:g}: expected a fraction (0-1) or a percentage", purity));
    m.standard_purity = purity;
    double pu = s->non_negative("purity_uncertainty", 0.0);
    if (pu > 0.5) pu /= 100.0;
    m.standard_purity_u = pu;
    m.standard_molar_mass_g_mol = s->positive("molar_mass_g_mol");
    m.standard_molar_mass_u_g_mol = s->uncertainty("molar_mass", "_g_mol");
    if (!m.standard_molar_mass_g_mol) {
      s->fail(s->line_of("molar_mass_g_mol"),
              "missing key 'standard.molar_mass_g_mol'",
              "e.g. molar_mass_g_mol = 204.22 for potassium hydrogen phthalate");
    }
    s->reject_unknown();
  }
  if (auto a = sub("acceptance")) {
    if (auto r = a->positive("max_rsd_percent")) m.max_rsd_percent = r;
    if (auto n = a->number("endpoints_required")) {
      if (*n < 1 || *n != std::floor(*n))
        a->fail(a->line_of("endpoints_required"), "'acceptance.endpoints_required' must be a whole number from 1");
      m.endpoints_required = static_cast<int>(*n);
    }
    a->reject_unknown();
  }
  if (auto r = sub("replicates")) {
    m.group_by = r->text("group_by").value_or("sample_id");
    m.group_pattern = r->text("pattern").value_or("");
    if (m.group_by != "sample_id" && m.group_by != "pattern") {
      r->fail(r->line_of("group_by"), "'replicates.group_by' = '" + m.group_by + "': expected sample_id or pattern");
    }
    if (m.group_by == "pattern" && m.group_pattern.empty()) {
      r->fail(r->line_of("group_by"),
              "missing key 'replicates.pattern' (group_by = \"pattern\")",
              "e.g. pattern = \"^(.*)_r[0-9]+$\": the first capture is the group");
    }
    r->reject_unknown();
  }

  // [[result]]: one or more.
  (void)top.has("result");
  const toml::node* results = root.get("result");
  if (results == nullptr) {
    top.fail(1,
             "missing [[result]]: a method reports at least one result",
             "add e.g.\n  [[result]]\n  name = \"Total alkalinity\"\n  unit = \"mg/L as CaCO3\"\n  at_pH = 4.5");
  }
  const toml::array* arr = results->as_array();
  if (arr == nullptr)
    top.fail(results->source().begin.line, "'result' must be written [[result]] (an array of tables)");
  for (const toml::node& node : *arr) {
    const toml::table* t = node.as_table();
    if (t == nullptr) top.fail(node.source().begin.line, "each [[result]] must be a table");
    TableReader r(*t, "result", name, node.source().begin.line);
    ResultSpec spec;
    spec.line = node.source().begin.line;
    spec.name = r.text("name").value_or(m.name);
    const auto unit = r.text("unit");
    if (!unit) {
      r.fail(spec.line,
             "missing key 'result.unit'",
             "one of: mol/L, g/L, mg/L, % (w/w), mg/L as CaCO3, mg KOH/g, mol/L titrant");
    }
    const auto u = unit_from_string(*unit);
    if (!u) {
      r.fail(r.line_of("unit"),
             "'result.unit' = '" + *unit + "' is not a unit veq reports",
             "one of: mol/L, g/L, mg/L, % (w/w), mg/L as CaCO3, mg KOH/g, mol/L titrant");
    }
    spec.unit = *u;
    if (r.has("endpoint")) {
      const toml::node* e = t->get("endpoint");
      // An integer node only: toml++'s value<int64_t>() would also convert a float, and one out of range
      // (7e107, found by fuzzing) is undefined behaviour.
      if (e->is_floating_point()) {
        r.fail(e->source().begin.line, "'result.endpoint' must be a whole number (1, 2, ...), \"first\" or \"last\"");
      } else if (const auto* in = e->as_integer()) {
        const int64_t i = in->get();
        if (i < 1 || i > 100)
          r.fail(e->source().begin.line, "'result.endpoint' must be 1 to 100, \"first\" or \"last\"");
        spec.endpoint.index = static_cast<int>(i);
        spec.endpoint.last = false;
      } else if (auto s = e->value<std::string>()) {
        if (*s == "last")
          spec.endpoint.last = true;
        else if (*s == "first")
          spec.endpoint.index = 1, spec.endpoint.last = false;
        else
          r.fail(e->source().begin.line, "'result.endpoint' = '" + *s + "': expected a number, \"first\" or \"last\"");
      } else {
        r.fail(e->source().begin.line, "'result.endpoint' must be a number, \"first\" or \"last\"");
      }
    }
    if (auto p = r.number("at_pH")) {
      if (*p < 0 || *p > 14)
        r.fail(r.line_of("at_pH"), fmt::format("'result.at_pH' = {:g}: expected a pH from 0 to 14", *p));
      if (t->contains("endpoint"))
        r.fail(r.line_of("at_pH"), "give either 'result.endpoint' or 'result.at_pH', not both");
      spec.endpoint.at_pH = p;
    }
    if (auto s = r.text("volume_from")) spec.endpoint.source = source_from(*s, r, r.line_of("volume_from"));
    spec.endpoint.pH_uncertainty = r.positive("ph_uncertainty", 0.02);
    if (auto d = r.number("decimals")) {
      if (*d < 0 || *d > 8 || *d != std::floor(*d)) r.fail(r.line_of("decimals"), "'result.decimals' must be 0 to 8");
      spec.decimals = static_cast<int>(*d);
    }
    spec.spec_low = r.number("spec_low");
    spec.spec_high = r.number("spec_high");
    if (spec.spec_low && spec.spec_high && !(*spec.spec_low < *spec.spec_high)) {
      r.fail(r.line_of("spec_high"), "'result.spec_high' must be above 'result.spec_low'");
    }
    r.reject_unknown();
    // What the unit needs from the method (sample amounts may also come from the run).
    const bool needs_M =
        spec.unit == ResultUnit::g_L || spec.unit == ResultUnit::mg_L || spec.unit == ResultUnit::percent_w_w;
    if (needs_M && !m.molar_mass_g_mol) {
      r.fail(spec.line,
             "missing key 'analyte.molar_mass_g_mol' (result unit " + std::string(to_string(spec.unit)) + ")",
             "add [analyte] molar_mass_g_mol = ...");
    }
    if (spec.unit == ResultUnit::titrant_mol_L && !m.standardisation) {
      r.fail(spec.line,
             "missing table [standard] (result unit mol/L titrant is a standardisation)",
             "add [standard] with name, mass_g (or the run's sample mass), purity and molar_mass_g_mol");
    }
    m.results.push_back(spec);
  }
  top.reject_unknown();
  return m;
}

Method load_method(const std::filesystem::path& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError({path.string(), 0, 0}, "cannot open the method file", "check the path");
  std::ostringstream ss;
  ss << in.rdbuf();
  const std::string text = ss.str();
  if (text.size() > (1u << 20)) throw InputError({path.string(), 0, 0}, "method file larger than 1 MiB");
  return parse_method(text, path.string(), path.parent_path());
}

}  // namespace veq::method
