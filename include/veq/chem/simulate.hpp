// SPDX-License-Identifier: MIT
// Synthetic titration runs from the model: dosing, electrode, noise, and the exact answers to grade against.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"
#include "veq/core/error.hpp"
#include "veq/core/run.hpp"

namespace veq::chem {

enum class DosingMode {
  constant,  // the same increment every time
  dynamic    // increments sized so that each changes the pH by about target_dpH
};

struct DosingOptions {
  DosingMode mode = DosingMode::constant;
  double start_volume_mL = 0.0;         // first reading [mL]
  double final_volume_mL = 0.0;         // last reading [mL]; 0: 1.3 x the last equivalence volume
  double step_mL = 0.1;                 // constant dosing: the increment [mL]
  double target_dpH = 0.1;              // dynamic dosing: wanted pH change per increment [pH]
  double min_step_mL = 0.01;            // dynamic dosing: smallest increment [mL]
  double max_step_mL = 0.5;             // dynamic dosing: largest increment [mL]
  double volume_resolution_mL = 0.001;  // burette resolution: every dosed volume is a multiple [mL]
  std::size_t max_points = 5000;        // refuse runs longer than this

  [[nodiscard]] std::vector<std::string> validate() const;
};

struct ElectrodeOptions {
  SignalKind signal = SignalKind::ph;  // what the run records: pH or electrode potential
  double e0_mV = 414.0;                // E at pH 0 [mV]; 414 puts pH 7 near 0 mV, as for a combination electrode
  double slope_efficiency = 1.0;       // electrode slope as a fraction of the Nernst slope (0.8–1.1)

  [[nodiscard]] std::vector<std::string> validate() const;
};

struct NoiseOptions {
  double sd = 0.0;                   // Gaussian reading noise, in signal units (pH or mV)
  double drift_per_min = 0.0;        // slow linear drift of the reading, signal units per minute
  double outlier_fraction = 0.0;     // probability that a reading is an outlier (0–0.5)
  double outlier_size = 0.5;         // offset of an outlier, signal units, random sign
  double reading_interval_s = 10.0;  // time between readings [s] (drift and the time column)
  std::uint64_t seed = 1;            // random stream: the same seed gives the same readings

  [[nodiscard]] std::vector<std::string> validate() const;
};

struct SimulationOptions {
  std::string sample_id = "SIM-1";
  Sample sample;
  Titrant titrant;
  ModelOptions model;
  DosingOptions dosing;
  ElectrodeOptions electrode;
  NoiseOptions noise;
  SolveOptions solve;

  // Every problem of every part, one line each, prefixed by the part ("dosing: step_mL = 0: ...").
  [[nodiscard]] std::vector<std::string> validate() const;
};

// A stoichiometric equivalence point: where the titrant added equals, in
// equivalents, the sample's protons (or proton acceptors) up to and including
// this step, taken in order of pKa.
struct EquivalencePoint {
  int index = 0;           // 1-based, in order of volume
  double volume_mL = 0.0;  // V0 * (equivalents up to this step) / Ct [mL]
  double pH = 0.0;         // exact model pH at that volume
  std::string analyte;     // the substance whose step this is
  int step = 0;            // 1-based pKa step of that substance; 0 for a strong acid or base
  double pKa = 0.0;        // that step's pKa at the run's temperature (NaN for a strong acid or base)
};

struct SimulatedReading {
  double volume_mL = 0.0;    // dosed volume, a multiple of the burette resolution [mL]
  double time_s = 0.0;       // [s]
  double pH_true = 0.0;      // model pH
  double signal_true = 0.0;  // pH_true, or the electrode potential it gives [pH or mV]
  double signal = 0.0;       // what the instrument records: signal_true + drift + noise (+ outlier)
  bool outlier = false;
  Equilibrium state;  // solved state (speciation() takes it)
};

struct Simulation {
  SimulationOptions options;
  Model<double> model;
  double electrode_slope_mV = 0.0;  // slope_efficiency x Nernst slope at the run's temperature [mV/pH]
  std::vector<EquivalencePoint> equivalence_points;
  std::vector<SimulatedReading> readings;
  std::vector<Diagnostic> warnings;  // e.g. ionic strength beyond the Davies range
};

// The stoichiometric equivalence points of a titration, with the model pH at
// each. The titrant's carbonate is not counted (volumes use Ct).
[[nodiscard]] std::vector<EquivalencePoint> equivalence_points(const Sample& sample,
                                                               const Titrant& titrant,
                                                               const ModelOptions& model_options,
                                                               const Titration<double>& titration);

// Simulates a run. Throws InputError (source "simulate") for invalid options
// or a model that cannot be solved.
[[nodiscard]] Simulation simulate(const SimulationOptions& options);

// ---- writing a simulated run as an instrument export ------------------------------------------------------

enum class MetadataStyle {
  none,      // the table alone
  colon,     // "Sample volume: 25 mL"
  equals,    // "Sample volume = 25 mL"
  comma,     // "Sample volume,25 mL"
  separator  // key and value apart by the column separator ("Sample volume;25 mL")
};

struct OutputFormat {
  char separator = ',';            // ',', ';', '\t', '|' or ' ' (columns two spaces apart)
  char decimal = '.';              // '.' or ',' (not with the ',' separator)
  std::string volume_unit = "mL";  // mL, uL or L
  MetadataStyle metadata = MetadataStyle::colon;
  std::vector<std::string> columns = {"volume", "signal"};  // order; also "temperature", "time"
  bool crlf = false;                                        // CRLF line ends instead of LF
  int volume_decimals = -1;        // decimals of volumes in mL; -1: from the burette resolution
  int signal_decimals = -1;        // -1: 3 for pH, 1 for mV
  bool write_calibration = false;  // E0 and slope lines in the metadata (mV runs)

  [[nodiscard]] std::vector<std::string> validate() const;
};

// The run as text in the given dialect; the same simulation gives the same bytes.
[[nodiscard]] std::string format_run(const Simulation& sim, const OutputFormat& format);

// The exact answers as JSON (schema "veq.truth/1"): the model, equivalence
// volumes and the pH at each, the noise-free readings.
[[nodiscard]] std::string truth_json(const Simulation& sim);

// A simulation described in a TOML file (see README, "veq simulate").
struct SimulationSpec {
  SimulationOptions simulation;
  OutputFormat output;
};

// Reads a TOML description. Throws InputError with the file, line and column
// of the first problem (unknown keys included, so that typos do not pass).
[[nodiscard]] SimulationSpec parse_simulation_toml(std::string_view text, const std::string& source_name);

// Separator and metadata style by name: "comma", "semicolon", "tab", "bar",
// "space" (or the character itself); "none", "colon", "equals", "comma".
// Throw InputError (source given) for anything else.
[[nodiscard]] char separator_from_name(std::string_view name, const std::string& source);
[[nodiscard]] MetadataStyle metadata_style_from_name(std::string_view name, const std::string& source);

}  // namespace veq::chem
