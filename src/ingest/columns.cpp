// SPDX-License-Identifier: MIT
// Header recognition by name and unit; names vary between instruments and people.
#include "ingest/columns.hpp"

#include <algorithm>
#include <array>
#include <vector>

#include "ingest/text.hpp"

namespace veq::ingest::detail {
namespace {

struct UnitRow {
  std::string_view spelling;
  UnitInfo info;
};

const std::vector<UnitRow>& unit_table() {
  static const std::vector<UnitRow> table = {
      {"ml", {Quantity::volume, "mL", 1.0, 0.0}},
      {"cm3", {Quantity::volume, "mL", 1.0, 0.0}},
      {"cc", {Quantity::volume, "mL", 1.0, 0.0}},
      {"milliliter", {Quantity::volume, "mL", 1.0, 0.0}},
      {"milliliters", {Quantity::volume, "mL", 1.0, 0.0}},
      {"millilitre", {Quantity::volume, "mL", 1.0, 0.0}},
      {"millilitres", {Quantity::volume, "mL", 1.0, 0.0}},
      {"ul", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"microl", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"mcl", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"microliter", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"microliters", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"microlitre", {Quantity::volume, "uL", 1e-3, 0.0}},
      {"l", {Quantity::volume, "L", 1000.0, 0.0}},
      {"liter", {Quantity::volume, "L", 1000.0, 0.0}},
      {"litre", {Quantity::volume, "L", 1000.0, 0.0}},
      {"dm3", {Quantity::volume, "L", 1000.0, 0.0}},
      {"ph", {Quantity::ph, "pH", 1.0, 0.0}},
      {"mv", {Quantity::potential, "mV", 1.0, 0.0}},
      {"millivolt", {Quantity::potential, "mV", 1.0, 0.0}},
      {"millivolts", {Quantity::potential, "mV", 1.0, 0.0}},
      {"v", {Quantity::potential, "V", 1000.0, 0.0}},
      {"volt", {Quantity::potential, "V", 1000.0, 0.0}},
      {"volts", {Quantity::potential, "V", 1000.0, 0.0}},
      {"c", {Quantity::temperature, "degC", 1.0, 0.0}},
      {"degc", {Quantity::temperature, "degC", 1.0, 0.0}},
      {"oc", {Quantity::temperature, "degC", 1.0, 0.0}},
      {"celsius", {Quantity::temperature, "degC", 1.0, 0.0}},
      // degrees Fahrenheit: C = (F - 32) x 5/9 (NIST SP 811 (2008) B.9, from memory)
      {"f", {Quantity::temperature, "degF", 5.0 / 9.0, -160.0 / 9.0}},
      {"degf", {Quantity::temperature, "degF", 5.0 / 9.0, -160.0 / 9.0}},
      {"of", {Quantity::temperature, "degF", 5.0 / 9.0, -160.0 / 9.0}},
      {"fahrenheit", {Quantity::temperature, "degF", 5.0 / 9.0, -160.0 / 9.0}},
      {"k", {Quantity::temperature, "K", 1.0, -273.15}},
      {"kelvin", {Quantity::temperature, "K", 1.0, -273.15}},
      {"s", {Quantity::time, "s", 1.0, 0.0}},
      {"sec", {Quantity::time, "s", 1.0, 0.0}},
      {"secs", {Quantity::time, "s", 1.0, 0.0}},
      {"second", {Quantity::time, "s", 1.0, 0.0}},
      {"seconds", {Quantity::time, "s", 1.0, 0.0}},
      {"ms", {Quantity::time, "ms", 1e-3, 0.0}},
      {"min", {Quantity::time, "min", 60.0, 0.0}},
      {"mins", {Quantity::time, "min", 60.0, 0.0}},
      {"minute", {Quantity::time, "min", 60.0, 0.0}},
      {"minutes", {Quantity::time, "min", 60.0, 0.0}},
      {"h", {Quantity::time, "h", 3600.0, 0.0}},
      {"hr", {Quantity::time, "h", 3600.0, 0.0}},
      {"hour", {Quantity::time, "h", 3600.0, 0.0}},
      {"hours", {Quantity::time, "h", 3600.0, 0.0}},
  };
  return table;
}

std::string squeeze(std::string_view s) {
  std::string out;
  for (char c : s) {
    if (c != ' ' && c != '\t' && c != '.') out.push_back(c);
  }
  return out;
}

std::vector<std::string> tokens(std::string_view s) {
  std::vector<std::string> out;
  std::string cur;
  for (char c : s) {
    const auto u = static_cast<unsigned char>(c);
    if ((c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || u >= 0x80) {
      cur.push_back(c);
    } else if (!cur.empty()) {
      out.push_back(cur);
      cur.clear();
    }
  }
  if (!cur.empty()) out.push_back(cur);
  return out;
}

bool contains(const std::vector<std::string>& toks, std::initializer_list<std::string_view> words) {
  for (const auto& t : toks) {
    for (auto w : words) {
      if (t == w) return true;
    }
  }
  return false;
}

bool is_derived_name(const std::vector<std::string>& toks) {
  for (const auto& t : toks) {
    if (t.rfind("delta", 0) == 0 || t.rfind("deriv", 0) == 0) return true;
    if (t == "dph" || t == "dv" || t == "de" || t == "dmv" || t == "d2ph" || t == "d2e" || t == "dvdph" ||
        t == "dphdv" || t == "dedv" || t == "1st" || t == "2nd" || t == "increment" || t == "incr" || t == "step" ||
        t == "rate" || t == "drift" || t == "calc" || t == "calculated" || t == "fit" || t == "fitted" ||
        t == "model") {
      return true;
    }
  }
  return false;
}

}  // namespace

std::optional<UnitInfo> find_unit(std::string_view text) {
  const std::string key = squeeze(normalize_label(text));
  for (const auto& row : unit_table()) {
    if (row.spelling == key) return row.info;
  }
  return std::nullopt;
}

std::string_view quantity_name(Quantity q) {
  switch (q) {
    case Quantity::none:
      return "unrecognised";
    case Quantity::volume:
      return "volume";
    case Quantity::ph:
      return "pH";
    case Quantity::potential:
      return "potential";
    case Quantity::temperature:
      return "temperature";
    case Quantity::time:
      return "time";
    case Quantity::derived:
      return "derived";
  }
  return "unrecognised";
}

HeaderInfo classify_header(std::string_view header) {
  HeaderInfo out;
  const std::string raw(trim(header));
  const std::string norm = normalize_label(raw);
  if (norm.empty()) return out;

  // Separate the name from the unit: "name (unit)", "name [unit]", "name/unit",
  // "name_unit", "name unit", or "unit name" ("ml NaOH").
  std::string name = norm;
  std::string unit;
  bool have_unit = false;
  const std::size_t open = norm.find_last_of("([");
  if (open != std::string::npos) {
    const char close_ch = norm[open] == '(' ? ')' : ']';
    const std::size_t close = norm.find(close_ch, open);
    unit = norm.substr(open + 1, (close == std::string::npos ? norm.size() : close) - open - 1);
    name = norm.substr(0, open) + (close == std::string::npos ? "" : norm.substr(close + 1));
    have_unit = true;
  } else if (const std::size_t slash = norm.rfind('/'); slash != std::string::npos) {
    name = norm.substr(0, slash);
    unit = norm.substr(slash + 1);
    have_unit = true;
  }
  auto name_toks = tokens(name);
  if (is_derived_name(name_toks)) {
    out.quantity = Quantity::derived;
    return out;
  }
  if (!have_unit && name_toks.size() >= 2) {
    if (find_unit(name_toks.back())) {
      unit = name_toks.back();
      name_toks.pop_back();
      have_unit = true;
    } else if (find_unit(name_toks.front()) && name_toks.front() != "ph") {
      unit = name_toks.front();
      name_toks.erase(name_toks.begin());
      have_unit = true;
    }
  }
  if (!have_unit && name_toks.size() == 1) {
    // A bare unit as the whole header: "mL", "mV", "°C".
    const std::string& t = name_toks.front();
    const bool degree = raw.find("\xC2\xB0") != std::string::npos || raw.find("\xE2\x84\x83") != std::string::npos;
    if (degree && (t == "c" || t == "f")) {
      out.quantity = Quantity::temperature;
      out.unit = find_unit(t);
      out.unit_text = raw;
      return out;
    }
    if (t != "v" && t != "ph" && t != "e" && t != "s" && t != "h" && t != "t" && t != "k" && t != "c" && t != "l" &&
        t != "f") {
      if (auto u = find_unit(t)) {
        out.quantity = u->quantity;
        out.unit = u;
        out.unit_text = std::string(trim(header));
        return out;
      }
    }
  }
  std::string unit_trim(trim(unit));
  if (have_unit && unit_trim.find('/') != std::string::npos) {
    // A rate or ratio (mL/min, pH/mL, mol/L): not a reading we use.
    out.quantity = Quantity::derived;
    return out;
  }
  std::optional<UnitInfo> unit_info;
  if (have_unit && !unit_trim.empty()) {
    unit_info = find_unit(unit_trim);
    out.unit_text = unit_trim;
  }

  // Quantity from the name.
  Quantity by_name = Quantity::none;
  if (contains(name_toks, {"ph"}) || name.rfind("ph", 0) == 0)
    by_name = Quantity::ph;
  else if (contains(name_toks,
                    {"volume",
                     "vol",
                     "v",
                     "titrant",
                     "added",
                     "dosed",
                     "dose",
                     "dosing",
                     "dosage",
                     "burette",
                     "buret",
                     "vtit",
                     "vadd",
                     "vt",
                     "consumption",
                     "addition",
                     "volumen"}))
    by_name = Quantity::volume;
  else if (contains(name_toks, {"e", "emf", "potential", "mv", "voltage", "u", "millivolts", "redox", "orp", "epot"}))
    by_name = Quantity::potential;
  else if (contains(name_toks, {"temp", "temperature", "theta", "temperatur"}))
    by_name = Quantity::temperature;
  else if (contains(name_toks, {"time", "elapsed", "duration", "zeit", "clock", "sec", "seconds"}))
    by_name = Quantity::time;
  else if (contains(name_toks, {"t"})) {
    // A lone T: the unit decides; without one, capital T is temperature, small t time.
    if (unit_info && (unit_info->quantity == Quantity::temperature || unit_info->quantity == Quantity::time))
      by_name = unit_info->quantity;
    else
      by_name = (raw.find('T') != std::string::npos) ? Quantity::temperature : Quantity::time;
  }

  if (unit_info) {
    // A known unit decides the quantity, except a pH column written "(pH)".
    out.quantity = unit_info->quantity;
    out.unit = unit_info;
    if (by_name == Quantity::ph && unit_info->quantity != Quantity::potential) {
      out.quantity = Quantity::ph;
      out.unit = find_unit("ph");
    }
    return out;
  }
  out.quantity = by_name;
  if (have_unit && !unit_trim.empty() && unit_trim != "-" && !(by_name == Quantity::ph)) {
    out.unit_unknown = by_name != Quantity::none;
  }
  if (by_name == Quantity::ph) out.unit = find_unit("ph");
  return out;
}

}  // namespace veq::ingest::detail
