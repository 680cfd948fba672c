// SPDX-License-Identifier: MIT
// A simulation described in TOML: every key checked, every problem reported with its line and column.
#include <fmt/format.h>
#include <toml++/toml.h>

#include <set>

#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"

namespace veq::chem {
namespace {

SourceLocation where(const std::string& file, const toml::source_region& r) {
  return {file, static_cast<std::size_t>(r.begin.line), static_cast<std::size_t>(r.begin.column)};
}

// Reads the keys of one table and refuses any it was not asked for.
class Keys {
 public:
  Keys(const toml::table& t, std::string file, std::string path)
      : m_table(t), m_file(std::move(file)), m_path(std::move(path)) {}

  [[noreturn]] void fail(const toml::node& n,
                         const std::string& key,
                         const std::string& what,
                         const std::string& hint = {}) const {
    throw InputError(where(m_file, n.source()), fmt::format("{}: {}", name(key), what), hint);
  }

  const toml::node* node(const std::string& key) {
    m_used.insert(key);
    return m_table.get(key);
  }

  std::optional<double> number(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    if (auto v = n->value_exact<double>()) return *v;
    if (auto i = n->value_exact<std::int64_t>()) return static_cast<double>(*i);
    fail(*n, key, "expected a number");
  }
  std::optional<std::int64_t> integer(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    if (auto i = n->value_exact<std::int64_t>()) return *i;
    fail(*n, key, "expected an integer");
  }
  std::optional<std::string> string(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    if (auto s = n->value_exact<std::string>()) return *s;
    fail(*n, key, "expected a string in quotes");
  }
  std::optional<bool> boolean(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    if (auto b = n->value_exact<bool>()) return *b;
    fail(*n, key, "expected true or false");
  }
  std::optional<std::vector<double>> numbers(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    const toml::array* a = n->as_array();
    if (a == nullptr) fail(*n, key, "expected an array of numbers, e.g. [2.15, 7.20]");
    std::vector<double> out;
    for (const toml::node& e : *a) {
      if (auto v = e.value_exact<double>())
        out.push_back(*v);
      else if (auto i = e.value_exact<std::int64_t>())
        out.push_back(static_cast<double>(*i));
      else
        fail(e, key, "expected only numbers in the array");
    }
    return out;
  }
  std::optional<std::vector<std::string>> strings(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return std::nullopt;
    const toml::array* a = n->as_array();
    if (a == nullptr) fail(*n, key, "expected an array of strings");
    std::vector<std::string> out;
    for (const toml::node& e : *a) {
      if (auto s = e.value_exact<std::string>())
        out.push_back(*s);
      else
        fail(e, key, "expected only strings in the array");
    }
    return out;
  }
  const toml::table* table(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return nullptr;
    if (const toml::table* t = n->as_table()) return t;
    fail(*n, key, "expected a table ([" + name(key) + "])");
  }
  const toml::array* array_of_tables(const std::string& key) {
    const toml::node* n = node(key);
    if (n == nullptr) return nullptr;
    const toml::array* a = n->as_array();
    if (a == nullptr || !a->is_array_of_tables()) fail(*n, key, "expected tables ([[" + name(key) + "]])");
    return a;
  }

  // Throws for the first key nobody asked for.
  void finish() const {
    for (auto&& [k, v] : m_table) {
      const std::string key(k.str());
      if (m_used.count(key) == 0) {
        throw InputError(where(m_file, k.source()),
                         fmt::format("unknown key '{}'", name(key)),
                         "see README, 'veq simulate', for the keys of each table");
      }
    }
  }

  [[nodiscard]] std::string name(const std::string& key) const { return m_path.empty() ? key : m_path + "." + key; }
  [[nodiscard]] const toml::table& self() const { return m_table; }

 private:
  const toml::table& m_table;
  std::string m_file;
  std::string m_path;
  std::set<std::string> m_used;
};

template <typename E>
E choose(Keys& k, const std::string& key, E current, std::initializer_list<std::pair<std::string_view, E>> choices) {
  const toml::node* n = k.node(key);
  if (n == nullptr) return current;
  const auto s = n->value_exact<std::string>();
  std::string list;
  for (const auto& c : choices) list += (list.empty() ? "" : ", ") + std::string(c.first);
  if (s) {
    for (const auto& c : choices) {
      if (*s == c.first) return c.second;
    }
  }
  k.fail(*n, key, "expected one of: " + list);
}

void set(double& field, const std::optional<double>& v) {
  if (v) field = *v;
}

Analyte read_analyte(const toml::table& t, const std::string& file, std::size_t index) {
  Keys k(t, file, fmt::format("sample.analyte[{}]", index));
  const std::optional<std::string> name = k.string("name");
  const std::optional<double> conc = k.number("conc_mol_L");
  const toml::node* kind_node = t.get("kind");
  const AnalyteKind kind_given = choose(k,
                                        "kind",
                                        AnalyteKind::weak,
                                        {{"weak", AnalyteKind::weak},
                                         {"strong acid", AnalyteKind::strong_acid},
                                         {"strong base", AnalyteKind::strong_base}});
  const auto pKa = k.numbers("pKa");
  const auto dpKa = k.numbers("dpKa_dT");
  const auto top = k.integer("top_charge");
  const auto added = k.integer("added_form");
  if (!conc)
    throw InputError(
        where(file, t.source()), k.name("conc_mol_L") + ": missing", "every analyte needs its concentration");
  Analyte a;
  const AnalyteInfo* info = name ? find_analyte(*name) : nullptr;
  if (info != nullptr && !pKa) {
    a = analyte(*name, *conc);
  } else {
    a.name = name.value_or(std::string(to_string(kind_given)));
    a.kind = kind_given;
    a.conc_mol_L = *conc;
    if (kind_given == AnalyteKind::weak && !pKa) {
      throw InputError(
          where(file, t.source()),
          fmt::format("{}: '{}' is not in the analyte table and has no pKa values", k.name("name"), a.name),
          "give pKa = [...] (and top_charge, added_form for a base or a salt), or a name from the table");
    }
  }
  if (kind_node != nullptr) a.kind = kind_given;
  if (pKa) a.pKa_25C = *pKa;
  if (dpKa) a.dpKa_dT_per_K = *dpKa;
  if (top) a.top_charge = static_cast<int>(*top);
  if (added) a.added_form = static_cast<int>(*added);
  k.finish();
  return a;
}

}  // namespace

SimulationSpec parse_simulation_toml(std::string_view text, const std::string& source_name) {
  toml::table root;
  try {
    root = toml::parse(text, source_name);
  } catch (const toml::parse_error& e) {
    throw InputError(where(source_name, e.source()), std::string(e.description()), "the file is not valid TOML");
  }
  SimulationSpec spec;
  SimulationOptions& o = spec.simulation;
  OutputFormat& out = spec.output;
  Keys top(root, source_name, "");
  if (auto id = top.string("sample_id")) o.sample_id = *id;

  if (const toml::table* t = top.table("sample")) {
    Keys k(*t, source_name, "sample");
    set(o.sample.volume_mL, k.number("volume_mL"));
    set(o.sample.background_ionic_strength_mol_L, k.number("background_ionic_strength_mol_L"));
    if (const toml::array* list = k.array_of_tables("analyte")) {
      std::size_t i = 0;
      for (const toml::node& n : *list) o.sample.analytes.push_back(read_analyte(*n.as_table(), source_name, ++i));
    }
    k.finish();
  }
  if (const toml::table* t = top.table("titrant")) {
    Keys k(*t, source_name, "titrant");
    o.titrant.kind = choose(k, "kind", o.titrant.kind, {{"base", TitrantKind::base}, {"acid", TitrantKind::acid}});
    set(o.titrant.conc_mol_L, k.number("conc_mol_L"));
    set(o.titrant.carbonate_fraction, k.number("carbonate_fraction"));
    if (auto s = k.string("name")) o.titrant.name = *s;
    k.finish();
  }
  if (const toml::table* t = top.table("model")) {
    Keys k(*t, source_name, "model");
    set(o.model.temperature_C, k.number("temperature_C"));
    o.model.activity =
        choose(k, "activity", o.model.activity, {{"davies", ActivityModel::davies}, {"ideal", ActivityModel::ideal}});
    o.model.kw =
        choose(k,
               "kw",
               o.model.kw,
               {{"iapws-r11-07", KwFormula::iapws_r11_07}, {"harned-robinson-1940", KwFormula::harned_robinson_1940}});
    if (auto a = k.number("davies_A")) o.model.davies_A = *a;
    set(o.model.davies_b, k.number("davies_b"));
    k.finish();
  }
  if (const toml::table* t = top.table("dosing")) {
    Keys k(*t, source_name, "dosing");
    o.dosing.mode =
        choose(k, "mode", o.dosing.mode, {{"constant", DosingMode::constant}, {"dynamic", DosingMode::dynamic}});
    set(o.dosing.start_volume_mL, k.number("start_volume_mL"));
    set(o.dosing.final_volume_mL, k.number("final_volume_mL"));
    set(o.dosing.step_mL, k.number("step_mL"));
    set(o.dosing.target_dpH, k.number("target_dpH"));
    set(o.dosing.min_step_mL, k.number("min_step_mL"));
    set(o.dosing.max_step_mL, k.number("max_step_mL"));
    set(o.dosing.volume_resolution_mL, k.number("volume_resolution_mL"));
    if (auto n = k.integer("max_points")) {
      if (*n < 0) k.fail(*t->get("max_points"), "max_points", "must be positive");
      o.dosing.max_points = static_cast<std::size_t>(*n);
    }
    k.finish();
  }
  if (const toml::table* t = top.table("electrode")) {
    Keys k(*t, source_name, "electrode");
    o.electrode.signal = choose(k, "signal", o.electrode.signal, {{"pH", SignalKind::ph}, {"mV", SignalKind::mv}});
    set(o.electrode.e0_mV, k.number("e0_mV"));
    set(o.electrode.slope_efficiency, k.number("slope_efficiency"));
    k.finish();
  }
  if (const toml::table* t = top.table("noise")) {
    Keys k(*t, source_name, "noise");
    set(o.noise.sd, k.number("sd"));
    set(o.noise.drift_per_min, k.number("drift_per_min"));
    set(o.noise.outlier_fraction, k.number("outlier_fraction"));
    set(o.noise.outlier_size, k.number("outlier_size"));
    set(o.noise.reading_interval_s, k.number("reading_interval_s"));
    if (auto s = k.integer("seed")) {
      if (*s < 0) k.fail(*t->get("seed"), "seed", "must be >= 0");
      o.noise.seed = static_cast<std::uint64_t>(*s);
    }
    k.finish();
  }
  if (const toml::table* t = top.table("output")) {
    Keys k(*t, source_name, "output");
    if (auto s = k.string("separator")) {
      try {
        out.separator = separator_from_name(*s, source_name);
      } catch (const InputError& e) {
        k.fail(*t->get("separator"), "separator", e.message(), e.hint());
      }
    }
    out.decimal = choose(k, "decimal", out.decimal, {{".", '.'}, {",", ','}, {"point", '.'}, {"comma", ','}});
    if (auto s = k.string("volume_unit")) out.volume_unit = *s;
    out.metadata = choose(k,
                          "metadata",
                          out.metadata,
                          {{"none", MetadataStyle::none},
                           {"colon", MetadataStyle::colon},
                           {"equals", MetadataStyle::equals},
                           {"comma", MetadataStyle::comma},
                           {"separator", MetadataStyle::separator}});
    if (auto c = k.strings("columns")) out.columns = *c;
    out.crlf = choose(k, "line_ending", out.crlf, {{"lf", false}, {"crlf", true}});
    if (auto n = k.integer("volume_decimals")) out.volume_decimals = static_cast<int>(*n);
    if (auto n = k.integer("signal_decimals")) out.signal_decimals = static_cast<int>(*n);
    if (auto b = k.boolean("write_calibration")) out.write_calibration = *b;
    k.finish();
  }
  top.finish();
  return spec;
}

}  // namespace veq::chem
