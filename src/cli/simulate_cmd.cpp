// SPDX-License-Identifier: MIT
// `veq simulate [MODEL.toml]`: a synthetic run from the chemistry model, in any dialect ingest reads.
#include <fmt/format.h>

#include <charconv>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <memory>
#include <optional>
#include <sstream>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/core/error.hpp"

namespace veq::cli {
namespace {

struct SimulateArgs {
  std::string model_file;
  std::string output = "-";
  std::string truth;
  bool force = false;
  bool quiet = false;
  // Sample.
  std::optional<std::string> sample_id;
  std::optional<double> sample_volume_mL;
  std::vector<std::string> analytes;    // NAME=CONC
  std::vector<std::string> weak_acids;  // CONC:pKa1[,pKa2...]
  std::vector<std::string> weak_bases;  // CONC:pKa1[,pKa2...]
  std::vector<double> strong_acids;
  std::vector<double> strong_bases;
  std::optional<double> ionic_strength_mol_L;
  // Titrant and conditions.
  std::optional<std::string> titrant;
  std::optional<double> titrant_conc_mol_L;
  std::optional<double> carbonate_fraction;
  std::optional<std::string> titrant_name;
  std::optional<double> temperature_C;
  bool ideal = false;
  std::optional<std::string> kw;
  // Dosing.
  std::optional<double> step_mL;
  std::optional<double> dynamic_dpH;
  std::optional<double> min_step_mL;
  std::optional<double> max_step_mL;
  std::optional<double> start_volume_mL;
  std::optional<double> final_volume_mL;
  std::optional<double> resolution_mL;
  // Electrode and noise.
  std::optional<std::string> signal;
  std::optional<double> e0_mV;
  std::optional<double> slope_efficiency;
  std::optional<double> noise_sd;
  std::optional<double> drift_per_min;
  std::optional<double> outlier_fraction;
  std::optional<double> outlier_size;
  std::optional<double> interval_s;
  std::optional<std::uint64_t> seed;
  // Dialect.
  std::optional<std::string> separator;
  std::optional<std::string> decimal;
  std::optional<std::string> volume_unit;
  std::optional<std::string> metadata;
  std::optional<std::string> column_order;
  bool crlf = false;
  std::optional<int> volume_decimals;
  std::optional<int> signal_decimals;
  bool write_calibration = false;
};

double number(std::string_view text, const std::string& option, const std::string& whole) {
  double v = 0.0;
  const auto r = std::from_chars(text.data(), text.data() + text.size(), v);
  if (text.empty() || r.ec != std::errc() || r.ptr != text.data() + text.size()) {
    throw InputError({option, 0, 0}, fmt::format("'{}' in '{}' is not a number", text, whole));
  }
  return v;
}

std::vector<double> numbers(std::string_view text, const std::string& option, const std::string& whole) {
  std::vector<double> out;
  std::size_t start = 0;
  while (true) {
    const std::size_t comma = text.find(',', start);
    out.push_back(number(
        text.substr(start, comma == std::string_view::npos ? std::string_view::npos : comma - start), option, whole));
    if (comma == std::string_view::npos) break;
    start = comma + 1;
  }
  return out;
}

// "CONC:pKa1,pKa2": a weak acid (base == false) or base with those pKa values.
chem::Analyte weak(const std::string& spec, bool base, std::size_t index) {
  const std::string option = base ? "--weak-base" : "--weak-acid";
  const std::size_t colon = spec.find(':');
  if (colon == std::string::npos) {
    throw InputError({option, 0, 0},
                     fmt::format("'{}' is not of the form CONC:pKa1[,pKa2...]", spec),
                     fmt::format("e.g. {} 0.05:4.76", option));
  }
  chem::Analyte a;
  a.kind = chem::AnalyteKind::weak;
  a.conc_mol_L = number(std::string_view(spec).substr(0, colon), option, spec);
  a.pKa_25C = numbers(std::string_view(spec).substr(colon + 1), option, spec);
  const int n = static_cast<int>(a.pKa_25C.size());
  // A base: the free base (all n sites unprotonated) is what is added; its conjugate acid carries +n.
  a.top_charge = base ? n : 0;
  a.added_form = base ? n : 0;
  a.name = fmt::format("{} {}", base ? "weak base" : "weak acid", index);
  return a;
}

void apply(const SimulateArgs& a, chem::SimulationSpec& spec) {
  chem::SimulationOptions& o = spec.simulation;
  chem::OutputFormat& f = spec.output;
  if (a.sample_id) o.sample_id = *a.sample_id;
  if (a.sample_volume_mL) o.sample.volume_mL = *a.sample_volume_mL;
  for (const std::string& s : a.analytes) {
    const std::size_t eq = s.rfind('=');
    if (eq == std::string::npos) {
      throw InputError({"--analyte", 0, 0},
                       fmt::format("'{}' is not of the form NAME=CONC", s),
                       "e.g. --analyte \"acetic acid=0.1\" (CONC in mol/L)");
    }
    o.sample.analytes.push_back(
        chem::analyte(s.substr(0, eq), number(std::string_view(s).substr(eq + 1), "--analyte", s)));
  }
  for (std::size_t i = 0; i < a.weak_acids.size(); ++i)
    o.sample.analytes.push_back(weak(a.weak_acids[i], false, i + 1));
  for (std::size_t i = 0; i < a.weak_bases.size(); ++i) o.sample.analytes.push_back(weak(a.weak_bases[i], true, i + 1));
  for (double c : a.strong_acids)
    o.sample.analytes.push_back({"strong acid", chem::AnalyteKind::strong_acid, c, {}, {}, 0, 0});
  for (double c : a.strong_bases)
    o.sample.analytes.push_back({"strong base", chem::AnalyteKind::strong_base, c, {}, {}, 0, 0});
  if (a.ionic_strength_mol_L) o.sample.background_ionic_strength_mol_L = *a.ionic_strength_mol_L;
  if (a.titrant) o.titrant.kind = *a.titrant == "acid" ? TitrantKind::acid : TitrantKind::base;
  if (a.titrant_conc_mol_L) o.titrant.conc_mol_L = *a.titrant_conc_mol_L;
  if (a.carbonate_fraction) o.titrant.carbonate_fraction = *a.carbonate_fraction;
  if (a.titrant_name) o.titrant.name = *a.titrant_name;
  if (a.temperature_C) o.model.temperature_C = *a.temperature_C;
  if (a.ideal) o.model.activity = chem::ActivityModel::ideal;
  if (a.kw)
    o.model.kw =
        *a.kw == "harned-robinson-1940" ? chem::KwFormula::harned_robinson_1940 : chem::KwFormula::iapws_r11_07;
  if (a.step_mL) {
    o.dosing.mode = chem::DosingMode::constant;
    o.dosing.step_mL = *a.step_mL;
  }
  if (a.dynamic_dpH) {
    o.dosing.mode = chem::DosingMode::dynamic;
    o.dosing.target_dpH = *a.dynamic_dpH;
  }
  if (a.step_mL && a.dynamic_dpH) {
    throw InputError({"--step", 0, 0}, "--step (constant dosing) and --dynamic (dynamic dosing) exclude each other");
  }
  if (a.min_step_mL) o.dosing.min_step_mL = *a.min_step_mL;
  if (a.max_step_mL) o.dosing.max_step_mL = *a.max_step_mL;
  if (a.start_volume_mL) o.dosing.start_volume_mL = *a.start_volume_mL;
  if (a.final_volume_mL) o.dosing.final_volume_mL = *a.final_volume_mL;
  if (a.resolution_mL) o.dosing.volume_resolution_mL = *a.resolution_mL;
  if (a.signal) o.electrode.signal = (*a.signal == "mV" || *a.signal == "mv") ? SignalKind::mv : SignalKind::ph;
  if (a.e0_mV) o.electrode.e0_mV = *a.e0_mV;
  if (a.slope_efficiency) o.electrode.slope_efficiency = *a.slope_efficiency;
  if (a.noise_sd) o.noise.sd = *a.noise_sd;
  if (a.drift_per_min) o.noise.drift_per_min = *a.drift_per_min;
  if (a.outlier_fraction) o.noise.outlier_fraction = *a.outlier_fraction;
  if (a.outlier_size) o.noise.outlier_size = *a.outlier_size;
  if (a.interval_s) o.noise.reading_interval_s = *a.interval_s;
  if (a.seed) o.noise.seed = *a.seed;
  if (a.separator) f.separator = chem::separator_from_name(*a.separator, "--separator");
  if (a.decimal) f.decimal = (*a.decimal == "comma" || *a.decimal == ",") ? ',' : '.';
  if (a.volume_unit) f.volume_unit = *a.volume_unit;
  if (a.metadata) f.metadata = chem::metadata_style_from_name(*a.metadata, "--metadata");
  if (a.column_order) {
    f.columns.clear();
    std::stringstream ss(*a.column_order);
    for (std::string c; std::getline(ss, c, ',');) f.columns.push_back(c);
  }
  if (a.crlf) f.crlf = true;
  if (a.volume_decimals) f.volume_decimals = *a.volume_decimals;
  if (a.signal_decimals) f.signal_decimals = *a.signal_decimals;
  if (a.write_calibration) f.write_calibration = true;
  if (const auto p = f.validate(); !p.empty()) throw InputError({"output format", 0, 0}, p.front());
}

std::string read_text(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in) throw InputError({path, 0, 0}, "cannot open the model file", "check the path");
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

}  // namespace

void add_simulate(CLI::App& app, Action& action) {
  auto st = std::make_shared<SimulateArgs>();
  SimulateArgs& a = *st;
  CLI::App* cmd =
      app.add_subcommand("simulate", "Write a synthetic run from the chemistry model (and its exact answers)");
  cmd->add_option("MODEL", a.model_file, "TOML file describing the simulation (command-line options win)");
  cmd->add_option("-o,--output", a.output, "Where to write the run, '-' for standard output (default)");
  cmd->add_option("--truth", a.truth, "Also write the exact equivalence volumes and pH values as JSON to FILE");
  cmd->add_flag("--force", a.force, "Replace existing output files");
  cmd->add_flag("-q,--quiet", a.quiet, "No summary on standard output");

  const char* sample = "Sample";
  cmd->add_option("--sample-id", a.sample_id, "Sample identifier written in the metadata (default SIM-1)")
      ->group(sample);
  cmd->add_option("--sample-volume", a.sample_volume_mL, "Sample volume V0 [mL] (default 25)")->group(sample);
  cmd->add_option("--analyte", a.analytes, "A substance from the analyte table: NAME=CONC [mol/L]; repeatable")
      ->group(sample);
  cmd->add_option("--weak-acid", a.weak_acids, "A weak acid: CONC:pKa1[,pKa2...] (up to 4 pKa); repeatable")
      ->group(sample);
  cmd->add_option("--weak-base", a.weak_bases, "A weak base: CONC:pKa1[,...] (pKa of its conjugate acid); repeatable")
      ->group(sample);
  cmd->add_option("--strong-acid", a.strong_acids, "A strong acid of this concentration [mol/L]; repeatable")
      ->group(sample);
  cmd->add_option("--strong-base", a.strong_bases, "A strong base of this concentration [mol/L]; repeatable")
      ->group(sample);
  cmd->add_option("--ionic-strength", a.ionic_strength_mol_L, "Background electrolyte as ionic strength [mol/L]")
      ->group(sample);

  const char* titrant = "Titrant and conditions";
  cmd->add_option("--titrant", a.titrant, "Titrant kind: base (default) or acid")
      ->group(titrant)
      ->check(CLI::IsMember({"acid", "base"}));
  cmd->add_option("--titrant-conc", a.titrant_conc_mol_L, "Titrant concentration Ct [mol/L] (default 0.1)")
      ->group(titrant);
  cmd->add_option(
         "--carbonate", a.carbonate_fraction, "Fraction of a base titrant's hydroxide turned to carbonate (0-1)")
      ->group(titrant);
  cmd->add_option("--titrant-name",
                  a.titrant_name,
                  "Titrant name in the metadata (default NaOH or HCl); written as given when it states a concentration")
      ->group(titrant);
  cmd->add_option("--temperature", a.temperature_C, "Temperature [°C] (default 25)")->group(titrant);
  cmd->add_flag("--ideal", a.ideal, "Ideal solution: no activity correction (default: Davies equation)")
      ->group(titrant);
  cmd->add_option("--kw", a.kw, "Kw formula: iapws-r11-07 (default) or harned-robinson-1940")
      ->group(titrant)
      ->check(CLI::IsMember({"iapws-r11-07", "harned-robinson-1940"}));

  const char* dosing = "Dosing";
  cmd->add_option("--step", a.step_mL, "Constant dosing with this increment [mL] (default 0.1)")->group(dosing);
  cmd->add_option("--dynamic", a.dynamic_dpH, "Dynamic dosing aiming at this pH change per increment")->group(dosing);
  cmd->add_option("--min-step", a.min_step_mL, "Dynamic dosing: smallest increment [mL] (default 0.01)")->group(dosing);
  cmd->add_option("--max-step", a.max_step_mL, "Dynamic dosing: largest increment [mL] (default 0.5)")->group(dosing);
  cmd->add_option("--start-volume", a.start_volume_mL, "First reading [mL] (default 0)")->group(dosing);
  cmd->add_option("--final-volume", a.final_volume_mL, "Last reading [mL] (default 1.3 x the last equivalence volume)")
      ->group(dosing);
  cmd->add_option("--resolution", a.resolution_mL, "Burette resolution [mL] (default 0.001)")->group(dosing);

  const char* electrode = "Electrode and noise";
  cmd->add_option("--signal", a.signal, "Record pH (default) or mV")
      ->group(electrode)
      ->check(CLI::IsMember({"pH", "mV", "ph", "mv"}));
  cmd->add_option("--e0", a.e0_mV, "Electrode potential at pH 0 [mV] (default 414)")->group(electrode);
  cmd->add_option("--slope-efficiency", a.slope_efficiency, "Electrode slope as a fraction of Nernst (default 1.0)")
      ->group(electrode);
  cmd->add_option("--noise", a.noise_sd, "Gaussian reading noise SD, in pH or mV (default 0)")->group(electrode);
  cmd->add_option("--drift", a.drift_per_min, "Slow drift, pH or mV per minute (default 0)")->group(electrode);
  cmd->add_option("--outliers", a.outlier_fraction, "Fraction of readings that are outliers (default 0)")
      ->group(electrode);
  cmd->add_option("--outlier-size", a.outlier_size, "Outlier offset, pH or mV (default 0.5)")->group(electrode);
  cmd->add_option("--interval", a.interval_s, "Seconds between readings (default 10)")->group(electrode);
  cmd->add_option("--seed", a.seed, "Random seed; the same seed gives the same file (default 1)")->group(electrode);

  const char* dialect = "Output dialect";
  cmd->add_option("--separator", a.separator, "comma (default), semicolon, tab, bar or space")->group(dialect);
  cmd->add_option("--decimal", a.decimal, "Decimal mark: point (default) or comma")
      ->group(dialect)
      ->check(CLI::IsMember({"point", "comma", ".", ","}));
  cmd->add_option("--volume-unit", a.volume_unit, "Unit of the volume column: mL (default), uL or L")
      ->group(dialect)
      ->check(CLI::IsMember({"mL", "uL", "L"}));
  cmd->add_option("--metadata",
                  a.metadata,
                  "Metadata block: colon (default), equals, comma, separator (the column separator) or none")
      ->group(dialect);
  cmd->add_option("--column-order", a.column_order, "Columns in order, e.g. time,volume,signal,temperature")
      ->group(dialect);
  cmd->add_flag("--crlf", a.crlf, "CRLF line ends (default LF)")->group(dialect);
  cmd->add_option("--volume-decimals", a.volume_decimals, "Decimals of volumes in mL (default: from the resolution)")
      ->group(dialect);
  cmd->add_option("--signal-decimals", a.signal_decimals, "Decimals of the signal (default 3 for pH, 1 for mV)")
      ->group(dialect);
  cmd->add_flag("--write-calibration", a.write_calibration, "Write the electrode's E0 and slope in the metadata")
      ->group(dialect);

  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      (void)err;
      const SimulateArgs& a = *st;
      chem::SimulationSpec spec;
      if (!a.model_file.empty()) spec = chem::parse_simulation_toml(read_text(a.model_file), a.model_file);
      apply(a, spec);
      if (spec.simulation.sample.analytes.empty()) {
        throw InputError({"simulate", 0, 0},
                         "the sample holds nothing to titrate",
                         "give --analyte NAME=CONC, --weak-acid, --strong-acid ..., or a model file");
      }
      const bool to_stdout = a.output == "-";
      // Refuse before writing anything, so that one existing file does not leave the other half-written.
      for (const std::string& target : {to_stdout ? std::string() : a.output, a.truth}) {
        if (!target.empty() && !a.force && std::filesystem::exists(target)) {
          throw InputError({target, 0, 0}, "the file exists already", "use --force to replace it");
        }
      }
      if (!a.truth.empty() && a.truth == a.output)
        throw InputError({a.truth, 0, 0}, "--truth and --output are the same file");
      const chem::Simulation sim = chem::simulate(spec.simulation);
      const std::string text = chem::format_run(sim, spec.output);
      if (to_stdout)
        out << text;
      else
        io::write_file_atomically(a.output, text, a.force);
      if (!a.truth.empty()) io::write_file_atomically(a.truth, chem::truth_json(sim), a.force);
      if (!a.quiet && !to_stdout) {
        out << fmt::format("Wrote {} readings to {}\n", sim.readings.size(), a.output);
        for (const chem::EquivalencePoint& e : sim.equivalence_points) {
          out << fmt::format("  equivalence point {}: {:.4f} mL at pH {:.3f}  ({}{})\n",
                             e.index,
                             e.volume_mL,
                             e.pH,
                             e.analyte,
                             e.step > 0 ? fmt::format(", step {}", e.step) : "");
        }
        for (const auto& w : sim.warnings) out << "  warning: " << w.message << "\n";
      }
      return kExitOk;
    };
  });
}

}  // namespace veq::cli
