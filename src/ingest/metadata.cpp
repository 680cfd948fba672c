// SPDX-License-Identifier: MIT
// Metadata lines and the run facts they state.
#include "ingest/metadata.hpp"

#include <algorithm>
#include <cmath>

#include "ingest/columns.hpp"
#include "ingest/text.hpp"
#include "veq/core/constants.hpp"

namespace veq::ingest::detail {
namespace {

// Lower case, every run of non-alphanumerics one space; a "(unit)" or
// "[unit]" part is cut off into unit.
std::string normalize_key(std::string_view key, std::string* unit) {
  std::string norm = normalize_label(key);
  const std::size_t open = norm.find_first_of("([");
  if (open != std::string::npos) {
    const std::size_t close = norm.find_first_of(")]", open);
    if (unit != nullptr) {
      *unit = std::string(
          trim(std::string_view(norm).substr(open + 1, (close == std::string::npos ? norm.size() : close) - open - 1)));
    }
    norm.erase(open);
  }
  std::string out;
  bool space = false;
  for (char c : norm) {
    const bool alnum = (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9');
    if (alnum) {
      if (space && !out.empty()) out.push_back(' ');
      space = false;
      out.push_back(c);
    } else {
      space = true;
    }
  }
  return out;
}

bool key_is(const std::string& key, std::initializer_list<std::string_view> names) {
  return std::any_of(names.begin(), names.end(), [&](std::string_view n) { return key == n; });
}

std::string squeeze_unit(std::string_view u) {
  std::string out;
  const std::string n = normalize_label(u);
  for (std::size_t i = 0; i < n.size(); ++i) {
    const char c = n[i];
    if (c == ' ' || c == '*' || c == '.') continue;
    if (static_cast<unsigned char>(c) == 0xC2 && i + 1 < n.size() &&
        static_cast<unsigned char>(n[i + 1]) == 0xB7) {  // middle dot
      ++i;
      continue;
    }
    out.push_back(c);
  }
  return out;
}

}  // namespace

std::optional<MetaEntry> parse_metadata_line(std::string_view line, std::size_t line_no) {
  std::string_view s = trim(line);
  while (!s.empty() && (s.front() == '#' || s.front() == ';' || s.front() == '/')) {
    if (s.front() == ';' || s.front() == '/') {
      if (s.size() < 2 || s[1] != s[0]) break;  // only ";;" and "//" comment leaders
      s.remove_prefix(2);
    } else {
      s.remove_prefix(1);
    }
    s = trim(s);
  }
  if (s.empty()) return std::nullopt;
  const std::size_t pos = s.find_first_of(":=,;\t|");
  if (pos == std::string_view::npos || pos == 0) return std::nullopt;
  std::string_view key = trim(s.substr(0, pos));
  if (key.size() >= 2 && key.front() == '"' && key.back() == '"') key = key.substr(1, key.size() - 2);
  std::string_view value = trim(s.substr(pos + 1));
  // Trailing separators and surrounding quotes are not part of the value.
  while (!value.empty() &&
         (value.back() == ',' || value.back() == ';' || value.back() == '\t' || value.back() == '|')) {
    value.remove_suffix(1);
    value = trim(value);
  }
  if (value.size() >= 2 && value.front() == '"' && value.back() == '"') value = value.substr(1, value.size() - 2);
  if (key.empty() || key.size() > 80) return std::nullopt;
  double number = 0.0;
  if (parse_number(key, '.', number) == NumberStatus::ok || parse_number(key, ',', number) == NumberStatus::ok) {
    return std::nullopt;  // a number is not a key
  }
  return MetaEntry{std::string(key), std::string(value), line_no};
}

std::optional<Amount> parse_quantity(std::string_view text) {
  std::string_view s = trim(text);
  std::size_t i = 0;
  while (i < s.size() && (std::string_view("+-0123456789.,eE").find(s[i]) != std::string_view::npos)) {
    // Stop at an 'e' that starts a unit word rather than an exponent.
    if ((s[i] == 'e' || s[i] == 'E') &&
        (i + 1 >= s.size() || std::string_view("+-0123456789").find(s[i + 1]) == std::string_view::npos))
      break;
    ++i;
  }
  std::string_view num = s.substr(0, i);
  while (!num.empty() && (num.back() == ',' || num.back() == '.')) num.remove_suffix(1);
  if (num.empty()) return std::nullopt;
  double value = 0.0;
  const bool comma = num.find(',') != std::string_view::npos && num.find('.') == std::string_view::npos;
  if (parse_number(num, comma ? ',' : '.', value) != NumberStatus::ok) return std::nullopt;
  return Amount{value, std::string(trim(s.substr(num.size())))};
}

std::optional<double> volume_to_mL(const Amount& q) {
  if (q.unit.empty()) return q.value;
  auto u = find_unit(q.unit);
  if (!u || u->quantity != Quantity::volume) return std::nullopt;
  return q.value * u->factor;
}

std::optional<double> mass_to_g(const Amount& q) {
  const std::string u = squeeze_unit(q.unit);
  if (u.empty() || u == "g" || u == "gram" || u == "grams") return q.value;
  if (u == "mg") return q.value * 1e-3;
  if (u == "kg") return q.value * 1e3;
  if (u == "ug") return q.value * 1e-6;
  return std::nullopt;
}

std::optional<double> conc_to_mol_L(const Amount& q) {
  const std::string u = squeeze_unit(q.unit);
  if (u.empty() || u == "mol/l" || u == "moll-1" || u == "mol/dm3" || u == "m" || u == "mmol/ml" ||
      u == "moll\xe2\x81\xbb\xc2\xb9" || u == "mol/liter" || u == "mol/litre" || u == "molar") {
    return q.value;
  }
  if (u == "mmol/l" || u == "mm") return q.value * 1e-3;
  return std::nullopt;
}

std::optional<double> normality_to_eq_L(const Amount& q) {
  const std::string u = squeeze_unit(q.unit);
  if (u == "n" || u == "eq/l" || u == "normal") return q.value;
  if (u == "mn" || u == "meq/l") return q.value * 1e-3;
  return std::nullopt;
}

int titrant_equivalents_from_name(std::string_view name) {
  std::string n;
  for (char c : normalize_label(name)) {
    if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')) n.push_back(c);
  }
  for (std::string_view two : {"h2so4", "sulfuric", "sulphuric", "baoh2", "caoh2", "bariumhydroxide", "oxalic"}) {
    if (n.find(two) != std::string::npos) return 2;
  }
  for (std::string_view one : {"hcl",
                               "hno3",
                               "hclo4",
                               "naoh",
                               "koh",
                               "lioh",
                               "hydrochloric",
                               "nitric",
                               "perchloric",
                               "tbah",
                               "tmah",
                               "sodiumhydroxide",
                               "potassiumhydroxide"}) {
    if (n.find(one) != std::string::npos) return 1;
  }
  return 0;
}

std::optional<double> temperature_to_C(const Amount& q) {
  if (q.unit.empty()) return q.value;
  auto u = find_unit(q.unit);
  if (!u || u->quantity != Quantity::temperature) return std::nullopt;
  return q.value * u->factor + u->offset;
}

TitrantKind titrant_kind_from_name(std::string_view name) {
  std::string n;
  for (char c : normalize_label(name)) {
    if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9')) n.push_back(c);
  }
  for (std::string_view b : {"naoh",
                             "koh",
                             "lioh",
                             "baoh2",
                             "hydroxide",
                             "tbah",
                             "tmah",
                             "base",
                             "alkali",
                             "alkaline",
                             "sodalye",
                             "caustic"}) {
    if (n.find(b) != std::string::npos) return TitrantKind::base;
  }
  for (std::string_view a :
       {"hcl", "h2so4", "hno3", "hclo4", "acid", "sulfuric", "sulphuric", "hydrochloric", "nitric", "perchloric"}) {
    if (n.find(a) != std::string::npos) return TitrantKind::acid;
  }
  return TitrantKind::unknown;
}

Facts facts_from_metadata(const std::vector<MetaEntry>& entries,
                          const std::string& file,
                          std::vector<Diagnostic>& warnings) {
  Facts f;
  std::optional<double> e0, slope, slope_percent, cal_temp;
  std::optional<double> conc_from_name;
  std::optional<double> normality;  // eq/L, converted once the titrant is known
  std::size_t normality_line = 0;
  auto warn = [&](const MetaEntry& e, const std::string& what) {
    warnings.push_back({"metadata_unit",
                        "metadata '" + excerpt(e.key) + "' = '" + excerpt(e.value) + "': " + what + "; ignored",
                        {file, e.line, 0}});
  };
  for (const auto& e : entries) {
    std::string key_unit;
    const std::string key = normalize_key(e.key, &key_unit);
    auto quantity = [&]() -> std::optional<Amount> {
      auto q = parse_quantity(e.value);
      if (q && q->unit.empty()) q->unit = key_unit;
      return q;
    };
    if (key_is(key,
               {"sample",
                "sample id",
                "sample name",
                "sample no",
                "sample number",
                "sample ident",
                "sample identifier",
                "id",
                "sample code",
                "sample label",
                "lims id",
                "run id",
                "probe",
                "probenname",
                "probennummer",
                "proben id",
                "probe id"})) {
      if (!e.value.empty()) f.sample_id = e.value;
    } else if (key_is(key,
                      {"sample volume",
                       "sample vol",
                       "v0",
                       "aliquot",
                       "aliquot volume",
                       "volume of sample",
                       "initial volume",
                       "sample size",
                       "sample amount",
                       "sample mass",
                       "sample weight",
                       "mass",
                       "weight",
                       "weighed amount",
                       "probenvolumen",
                       "vorlage",
                       "einwaage",
                       "probenmasse"})) {
      auto q = quantity();
      if (!q) {
        warn(e, "no number found");
        continue;
      }
      const bool mass_key =
          key.find("mass") != std::string::npos || key.find("weigh") != std::string::npos || key == "einwaage";
      if (auto v = volume_to_mL(*q); v && !mass_key) {
        if (*v <= 0)
          warn(e, "a sample volume must be positive");
        else
          f.sample_volume_mL = *v;
      } else if (auto m = mass_to_g(*q); m && (mass_key || !q->unit.empty())) {
        if (*m <= 0)
          warn(e, "a sample mass must be positive");
        else
          f.sample_mass_g = *m;
      } else {
        warn(e, "unit '" + excerpt(q->unit) + "' not understood (expected mL, uL, L, g or mg)");
      }
    } else if (key_is(key,
                      {"titrant", "titrant name", "reagent", "titrating agent", "titrant reagent", "titriermittel"})) {
      f.titrant_name = e.value;
      if (f.titrant_kind == TitrantKind::unknown) f.titrant_kind = titrant_kind_from_name(e.value);
      // "NaOH 0.1000 mol/L": a concentration inside the name.
      std::string_view rest = e.value;
      while (!rest.empty()) {
        const std::size_t sp = rest.find(' ');
        std::string_view tok = rest.substr(0, sp);
        rest = sp == std::string_view::npos ? std::string_view{} : rest.substr(sp + 1);
        if (tok.empty() || std::string_view("0123456789.,").find(tok.front()) == std::string_view::npos) continue;
        std::string candidate(tok);
        if (auto space = rest.find(' '); !rest.empty()) candidate.append(" ").append(rest.substr(0, space));
        for (const auto& text : {candidate, std::string(tok)}) {
          auto q = parse_quantity(text);
          if (!q || q->unit.empty()) continue;
          if (auto c = conc_to_mol_L(*q))
            conc_from_name = *c;
          else if (auto nq = normality_to_eq_L(*q))
            normality = *nq, normality_line = e.line;
          if (conc_from_name || normality) break;
        }
        if (conc_from_name || normality) break;
      }
    } else if (key_is(key, {"c", "conc", "concentration", "molarity"}) && !key_unit.empty() &&
               titrant_kind_from_name(key_unit) != TitrantKind::unknown) {
      // "c(NaOH) = 0.1 mol/L": the titrant's concentration, the titrant named in the brackets.
      const auto q = parse_quantity(e.value);
      const std::optional<double> c = q ? conc_to_mol_L(*q) : std::nullopt;
      if (!c)
        warn(e, "expected a concentration such as 0.1 mol/L");
      else if (*c <= 0)
        warn(e, "a concentration must be positive");
      else
        f.titrant_conc_mol_L = *c;
      if (f.titrant_name.empty()) {
        const std::string_view k(e.key);
        const std::size_t open = k.find_first_of("([");
        const std::size_t close = open == std::string_view::npos ? open : k.find_first_of(")]", open);
        if (close != std::string_view::npos) f.titrant_name = std::string(trim(k.substr(open + 1, close - open - 1)));
      }
      if (f.titrant_kind == TitrantKind::unknown) f.titrant_kind = titrant_kind_from_name(key_unit);
    } else if (key_is(key,
                      {"titrant concentration",
                       "titrant conc",
                       "concentration",
                       "titrant molarity",
                       "molarity",
                       "c titrant",
                       "titrant c",
                       "normality",
                       "titrant normality",
                       "conc",
                       "nominal concentration",
                       "titrant nominal concentration",
                       "konzentration",
                       "titriermittel konzentration"})) {
      auto q = quantity();
      std::optional<double> c = q ? conc_to_mol_L(*q) : std::nullopt;
      const std::optional<double> nq = q && !c ? normality_to_eq_L(*q) : std::nullopt;
      const bool normality_key = key.find("normality") != std::string::npos;
      if (!q)
        warn(e, "no number found");
      else if (nq || (normality_key && c && q->unit.empty()))
        normality = nq ? *nq : *c, normality_line = e.line;
      else if (!c)
        warn(e, "unit '" + excerpt(q->unit) + "' not understood (expected mol/L, M, N or mmol/L)");
      else if (*c <= 0)
        warn(e, "a concentration must be positive");
      else
        f.titrant_conc_mol_L = *c;
    } else if (key_is(key, {"titrant type", "titrant kind", "titration type", "titrant class"})) {
      const TitrantKind k = titrant_kind_from_name(e.value);
      if (k != TitrantKind::unknown) f.titrant_kind = k;
    } else if (key_is(key, {"temperature", "temp", "sample temperature", "t", "temperatur"})) {
      auto q = quantity();
      std::optional<double> t = q ? temperature_to_C(*q) : std::nullopt;
      if (!t)
        warn(e, "expected a temperature in °C or K");
      else if (*t < -5 || *t > 100)
        warn(e, "temperature outside 0–100 °C");
      else
        f.temperature_C = *t;
    } else if (key_is(key, {"e0", "electrode e0", "electrode offset", "e0 mv", "electrode zero"})) {
      if (auto q = quantity())
        e0 = q->value * (squeeze_unit(q->unit) == "v" ? 1000.0 : 1.0);
      else
        warn(e, "no number found");
    } else if (key_is(key, {"slope", "electrode slope"})) {
      if (auto q = quantity()) {
        if (squeeze_unit(q->unit) == "%")
          slope_percent = q->value;
        else
          slope = q->value;
      } else {
        warn(e, "no number found");
      }
    } else if (key_is(key, {"calibration temperature", "electrode calibration temperature"})) {
      if (auto q = quantity()) cal_temp = temperature_to_C(*q);
    }
  }
  if (!f.titrant_conc_mol_L && conc_from_name) f.titrant_conc_mol_L = conc_from_name;
  if (!f.titrant_conc_mol_L && normality && *normality > 0) {
    // Normality is equivalents per litre: divide by the titrant's equivalents per mole
    // (2 for sulfuric acid; Standard Methods 2320 titrates with 0.02 N H2SO4).
    const int eq = titrant_equivalents_from_name(f.titrant_name);
    f.titrant_conc_mol_L = *normality / (eq > 0 ? eq : 1);
    if (eq == 0) {
      warnings.push_back({"normality_assumed",
                          "titrant concentration given as a normality for a titrant veq does not know; taken as "
                          "1 equivalent per mole",
                          {file, normality_line, 0}});
    }
  }
  if (e0) {
    ElectrodeCalibration cal;
    cal.e0_mV = *e0;
    cal.temperature_C = cal_temp.value_or(f.temperature_C.value_or(constants::kStandardTemperatureC));
    const double nernst = nernst_slope_mV(cal.temperature_C);
    cal.slope_mV_per_pH = slope ? std::fabs(*slope) : nernst * slope_percent.value_or(100.0) / 100.0;
    cal.source = "metadata";
    cal.at_run_temperature = !cal_temp && !f.temperature_C;
    if (!slope) cal.nernst_fraction = slope_percent.value_or(100.0) / 100.0;
    if (cal.slope_mV_per_pH > 0.8 * nernst && cal.slope_mV_per_pH < 1.1 * nernst) {  // as signal::kMinSlopeFraction
      f.electrode = cal;
    } else {
      warnings.push_back({"metadata_electrode",
                          "electrode slope in the metadata is not plausible (expected near " +
                              std::to_string(static_cast<int>(std::lround(nernst))) + " mV/pH); ignored",
                          {file, 0, 0}});
    }
  }
  return f;
}

}  // namespace veq::ingest::detail
