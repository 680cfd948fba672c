// SPDX-License-Identifier: MIT
// Writing a simulated run in an export dialect that ingest reads, and the truth file.
#include <fmt/format.h>

#include <charconv>
#include <cmath>
#include <nlohmann/json.hpp>
#include <optional>

#include "veq/chem/simulate.hpp"

namespace veq::chem {
namespace {

struct VolumeUnit {
  std::string_view name;
  double per_mL;      // values in this unit per mL
  int decimal_shift;  // decimals to add to the mL decimals
};

std::optional<VolumeUnit> find_volume_unit(std::string_view name) {
  if (name == "mL") return VolumeUnit{"mL", 1.0, 0};
  if (name == "uL") return VolumeUnit{"uL", 1000.0, -3};
  if (name == "L") return VolumeUnit{"L", 0.001, 3};
  return std::nullopt;
}

int resolution_decimals(double resolution_mL) {
  int d = 0;
  while (d < 9 && std::fabs(resolution_mL * std::pow(10.0, d) - std::round(resolution_mL * std::pow(10.0, d))) > 1e-9)
    ++d;
  return d;
}

// Fixed notation with `decimals` digits and the chosen decimal mark; never "-0".
std::string fixed(double v, int decimals, char decimal) {
  std::string s = fmt::format("{:.{}f}", v, std::max(decimals, 0));
  if (s.front() == '-' && s.find_first_not_of("-0.") == std::string::npos) s.erase(0, 1);
  if (decimal != '.') {
    for (char& c : s) {
      if (c == '.') c = decimal;
    }
  }
  return s;
}

// A parameter for the metadata block: enough digits to give it back exactly, no exponent.
std::string plain(double v, char decimal) {
  for (int d = 0; d <= 12; ++d) {
    const std::string s = fmt::format("{:.{}f}", v, d);
    double back = 0.0;
    std::from_chars(s.data(), s.data() + s.size(), back);  // locale-independent, unlike stod
    if (back == v) return fixed(v, d, decimal);
  }
  return fixed(v, 12, decimal);
}

std::string titrant_name(const Titrant& t) {
  if (!t.name.empty()) return t.name;
  return t.kind == TitrantKind::acid ? "HCl" : "NaOH";
}

}  // namespace

char separator_from_name(std::string_view name, const std::string& source) {
  if (name == "comma" || name == ",") return ',';
  if (name == "semicolon" || name == ";") return ';';
  if (name == "tab" || name == "\t" || name == "\\t") return '\t';
  if (name == "bar" || name == "|") return '|';
  if (name == "space" || name == " ") return ' ';
  throw InputError(
      {source, 0, 0}, "separator '" + std::string(name) + "' is not known", "use comma, semicolon, tab, bar or space");
}

MetadataStyle metadata_style_from_name(std::string_view name, const std::string& source) {
  if (name == "none") return MetadataStyle::none;
  if (name == "colon") return MetadataStyle::colon;
  if (name == "equals") return MetadataStyle::equals;
  if (name == "comma") return MetadataStyle::comma;
  if (name == "separator") return MetadataStyle::separator;
  throw InputError({source, 0, 0},
                   "metadata style '" + std::string(name) + "' is not known",
                   "use none, colon ('Key: value'), equals ('Key = value'), comma ('Key,value') or separator "
                   "('Key;value' with the column separator)");
}

std::vector<std::string> OutputFormat::validate() const {
  std::vector<std::string> p;
  if (std::string_view(",;\t| ").find(separator) == std::string_view::npos)
    p.push_back("separator: must be ',', ';', tab, '|' or space");
  if (decimal != '.' && decimal != ',') p.push_back("decimal: must be '.' or ','");
  if (decimal == ',' && separator == ',') p.push_back("decimal ',': cannot be used with the ',' separator");
  if (!find_volume_unit(volume_unit)) p.push_back("volume_unit = '" + volume_unit + "': must be mL, uL or L");
  bool have_volume = false, have_signal = false;
  for (std::size_t i = 0; i < columns.size(); ++i) {
    const std::string& c = columns[i];
    if (c != "volume" && c != "signal" && c != "temperature" && c != "time")
      p.push_back("columns: '" + c + "' is not one of volume, signal, temperature, time");
    for (std::size_t k = 0; k < i; ++k) {
      if (columns[k] == c) p.push_back("columns: '" + c + "' appears twice");
    }
    have_volume = have_volume || c == "volume";
    have_signal = have_signal || c == "signal";
  }
  if (!have_volume || !have_signal) p.push_back("columns: need both volume and signal");
  if (volume_decimals < -1 || volume_decimals > 9)
    p.push_back(fmt::format("volume_decimals = {}: must be in [0, 9] (or -1)", volume_decimals));
  if (signal_decimals < -1 || signal_decimals > 9)
    p.push_back(fmt::format("signal_decimals = {}: must be in [0, 9] (or -1)", signal_decimals));
  return p;
}

std::string format_run(const Simulation& sim, const OutputFormat& f) {
  if (const auto p = f.validate(); !p.empty()) {
    std::string all;
    for (const auto& s : p) all += (all.empty() ? "" : "; ") + s;
    throw InputError({"output format", 0, 0}, all);
  }
  const SimulationOptions& o = sim.options;
  const bool mv = o.electrode.signal == SignalKind::mv;
  const VolumeUnit unit = *find_volume_unit(f.volume_unit);
  const int mL_decimals =
      f.volume_decimals >= 0 ? f.volume_decimals : resolution_decimals(o.dosing.volume_resolution_mL);
  const int v_decimals = std::max(0, mL_decimals + unit.decimal_shift);
  const int s_decimals = f.signal_decimals >= 0 ? f.signal_decimals : (mv ? 1 : 3);
  const std::string eol = f.crlf ? "\r\n" : "\n";
  const std::string sep = f.separator == ' ' ? std::string("  ") : std::string(1, f.separator);
  const char dec = f.decimal;

  std::string out;
  if (f.metadata != MetadataStyle::none) {
    const std::string kv = f.metadata == MetadataStyle::colon    ? ": "
                           : f.metadata == MetadataStyle::equals ? " = "
                           : f.metadata == MetadataStyle::comma
                               ? ","
                               : (f.separator == ' ' ? "," : std::string(1, f.separator));
    auto line = [&](std::string_view key, const std::string& value) {
      out += key;
      out += kv;
      out += value;
      out += eol;
    };
    line("Sample", o.sample_id);
    line("Note", fmt::format("synthetic run written by veq simulate (seed {})", o.noise.seed));
    line("Sample volume", plain(o.sample.volume_mL, dec) + " mL");
    // A name that already states a concentration ("NaOH 0.1000 mol/L", the nominal one on the
    // bottle) is written as given, so that the file can carry a nominal value beside a true one.
    const std::string tname = titrant_name(o.titrant);
    const bool states_conc = tname.find_first_of("0123456789") != std::string::npos &&
                             (tname.find("mol/L") != std::string::npos || tname.find(" M") != std::string::npos ||
                              tname.find(" N") != std::string::npos || tname.find("mol/l") != std::string::npos);
    line("Titrant", states_conc ? tname : tname + " " + plain(o.titrant.conc_mol_L, dec) + " mol/L");
    line("Temperature",
         plain(o.model.temperature_C, dec) +
             " \xC2\xB0"
             "C");
    if (mv && f.write_calibration) {
      line("E0", plain(o.electrode.e0_mV, dec) + " mV");
      line("Slope", fixed(sim.electrode_slope_mV, 3, dec) + " mV/pH");
    }
    out += eol;
  }
  auto header = [&](const std::string& c) -> std::string {
    if (c == "volume") return fmt::format("Volume ({})", unit.name);
    if (c == "signal") return mv ? "E (mV)" : "pH";
    if (c == "temperature")
      return "Temperature (\xC2\xB0"
             "C)";
    return "Time (s)";
  };
  for (std::size_t i = 0; i < f.columns.size(); ++i) {
    if (i > 0) out += sep;
    out += header(f.columns[i]);
  }
  out += eol;
  for (const SimulatedReading& r : sim.readings) {
    for (std::size_t i = 0; i < f.columns.size(); ++i) {
      if (i > 0) out += sep;
      const std::string& c = f.columns[i];
      if (c == "volume")
        out += fixed(r.volume_mL * unit.per_mL, v_decimals, dec);
      else if (c == "signal")
        out += fixed(r.signal, s_decimals, dec);
      else if (c == "temperature")
        out += fixed(o.model.temperature_C, 1, dec);
      else
        out += fixed(r.time_s, 1, dec);
    }
    out += eol;
  }
  return out;
}

std::string truth_json(const Simulation& sim) {
  using nlohmann::ordered_json;
  const SimulationOptions& o = sim.options;
  auto number_or_null = [](double v) { return std::isfinite(v) ? ordered_json(v) : ordered_json(nullptr); };
  ordered_json j;
  j["schema"] = "veq.truth/1";
  j["veq_version"] = VEQ_VERSION;
  j["sample_id"] = o.sample_id;
  j["seed"] = o.noise.seed;
  ordered_json model;
  model["temperature_C"] = o.model.temperature_C;
  model["activity"] = std::string(to_string(o.model.activity));
  model["kw_formula"] = std::string(to_string(o.model.kw));
  model["pKw"] = sim.model.pKw;
  model["davies_A"] = sim.model.davies_A;
  model["sample_volume_mL"] = o.sample.volume_mL;
  model["background_ionic_strength_mol_L"] = o.sample.background_ionic_strength_mol_L;
  ordered_json analytes = ordered_json::array();
  for (const Analyte& a : o.sample.analytes) {
    ordered_json x;
    x["name"] = a.name;
    x["kind"] = std::string(to_string(a.kind));
    x["conc_mol_L"] = a.conc_mol_L;
    if (a.kind == AnalyteKind::weak) {
      ordered_json pk = ordered_json::array();
      for (std::size_t k = 0; k < a.pKa_25C.size(); ++k) pk.push_back(a.pKa_at(k, o.model.temperature_C));
      x["pKa"] = pk;
      x["top_charge"] = a.top_charge;
      x["added_form"] = a.added_form;
    }
    analytes.push_back(x);
  }
  model["analytes"] = analytes;
  model["titrant"] = {{"kind", std::string(to_string(o.titrant.kind))},
                      {"conc_mol_L", o.titrant.conc_mol_L},
                      {"carbonate_fraction", o.titrant.carbonate_fraction}};
  j["model"] = model;
  j["electrode"] = {{"signal", std::string(to_string(o.electrode.signal))},
                    {"e0_mV", o.electrode.e0_mV},
                    {"slope_efficiency", o.electrode.slope_efficiency},
                    {"slope_mV_per_pH", sim.electrode_slope_mV}};
  ordered_json eqs = ordered_json::array();
  for (const EquivalencePoint& e : sim.equivalence_points) {
    eqs.push_back({{"index", e.index},
                   {"volume_mL", e.volume_mL},
                   {"pH", e.pH},
                   {"analyte", e.analyte},
                   {"step", e.step},
                   {"pKa", number_or_null(e.pKa)}});
  }
  j["equivalence_points"] = eqs;
  ordered_json vol = ordered_json::array(), ph = ordered_json::array(), sig = ordered_json::array(),
               outliers = ordered_json::array();
  for (std::size_t i = 0; i < sim.readings.size(); ++i) {
    const SimulatedReading& r = sim.readings[i];
    vol.push_back(r.volume_mL);
    ph.push_back(r.pH_true);
    sig.push_back(r.signal_true);
    if (r.outlier) outliers.push_back(i + 1);
  }
  j["readings"] = {{"count", sim.readings.size()},
                   {"volume_mL", vol},
                   {"pH_true", ph},
                   {"signal_true", sig},
                   {"outliers", outliers}};
  ordered_json warnings = ordered_json::array();
  for (const auto& w : sim.warnings) warnings.push_back({{"code", w.code}, {"message", w.message}});
  j["warnings"] = warnings;
  return j.dump(2) + "\n";
}

}  // namespace veq::chem
