// SPDX-License-Identifier: MIT
// Run and Curve: the types passed between the stages of the pipeline.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "veq/core/error.hpp"

namespace veq {

// What the instrument measured against volume.
enum class SignalKind { ph, mv };
[[nodiscard]] std::string_view to_string(SignalKind kind);  // "pH" or "mV"

// What the burette delivered: a base (pH rises) or an acid (pH falls).
enum class TitrantKind { unknown, base, acid };
[[nodiscard]] std::string_view to_string(TitrantKind kind);  // "unknown", "base", "acid"

// How a file was written, as ingest found it. Reported so that a reader can
// check that the file was understood.
struct Dialect {
  std::string encoding = "utf-8";   // utf-8, utf-8-bom, utf-16le, utf-16be, latin-1
  std::string line_ending = "lf";   // lf, crlf, cr, mixed, none
  char separator = ',';             // ' ' stands for runs of spaces or tabs
  char decimal = '.';               // '.' or ','
  std::size_t header_line = 0;      // 1-based; 0 when the table has no header
  std::size_t first_data_line = 0;  // 1-based line of the first reading
};

// A column of the table as ingest identified it.
struct Column {
  std::size_t index = 0;  // 0-based position in the row
  std::string header;     // as written in the file ("" when there is no header)
  std::string unit;       // canonical unit: mL, uL, L, pH, mV, V, degC, K, s, min, h
};

// Electrode calibration for converting a potential to pH:
// pH = (e0_mV - E) / slope_mV_per_pH, the slope referring to temperature_C.
struct ElectrodeCalibration {
  double e0_mV = 0.0;            // potential at pH 0 [mV]
  double slope_mV_per_pH = 0.0;  // positive when E falls as pH rises (the usual sign) [mV]
  double temperature_C = 25.0;   // temperature the slope was measured at [°C]
  std::string source;            // where it came from: "options", "metadata", "buffers"
  // A calibration stated without a temperature of its own (an E0 line in a file with no temperature line):
  // taken at the run's temperature, the slope too when it is a fraction of Nernst's (nernst_fraction).
  bool at_run_temperature = false;
  std::optional<double> nernst_fraction;  // the slope as a fraction of the Nernst slope, when given so
};

// What is known about a run beyond its readings: from the file's metadata
// block, overridden by the command line or a method. Missing facts stay empty;
// a stage that needs one says so instead of guessing.
struct Facts {
  std::string sample_id;
  std::optional<double> sample_volume_mL;    // V0 [mL]
  std::optional<double> sample_mass_g;       // [g]
  std::optional<double> titrant_conc_mol_L;  // Ct [mol/L]
  TitrantKind titrant_kind = TitrantKind::unknown;
  std::string titrant_name;
  std::optional<double> temperature_C;  // [°C]
  std::optional<ElectrodeCalibration> electrode;
};

// One exported log as read from disk: the readings in file order (ascending
// volume unless the reader was asked to sort), in canonical units.
struct Run {
  std::string source;  // path or name as given
  Dialect dialect;
  std::vector<std::pair<std::string, std::string>> metadata;  // file order
  std::vector<std::string> notes;                             // free text before or after the table
  Facts facts;
  SignalKind signal = SignalKind::ph;
  Column volume_column;
  Column signal_column;
  std::optional<Column> temperature_column;
  std::optional<Column> time_column;
  std::vector<double> volume_mL;      // [mL]
  std::vector<double> signal_values;  // [pH] or [mV]
  std::vector<double> temperature_C;  // [°C]; empty when the file has none
  std::vector<double> time_s;         // [s]; empty when the file has none
  std::vector<std::uint32_t> line;    // 1-based source line of each reading
  double signal_resolution = 0.0;     // smallest step the file's digits can show
  std::vector<Diagnostic> warnings;
};

// A run made ready for endpoint detection: volumes strictly ascending,
// duplicates merged, the signal in pH when an electrode calibration was
// available (mV otherwise), spikes flagged, noise estimated.
struct Curve {
  SignalKind signal = SignalKind::ph;
  std::vector<double> volume_mL;    // strictly ascending [mL]
  std::vector<double> value;        // [pH] or [mV]
  std::vector<std::uint32_t> line;  // source line of each point (first of merged ones)
  std::vector<std::uint8_t> spike;  // 1 where a reading is an isolated spike
  double noise_sd = 0.0;            // estimated reading noise, same unit as value
  double resolution = 0.0;          // reading resolution, same unit as value
  double temperature_C = 25.0;      // [°C] mean temperature of the run
  bool temperature_known = false;   // false: 25 °C assumed
  int direction = +1;               // +1 when value rises with volume, -1 when it falls
  bool converted_from_mv = false;   // true when value is pH computed from mV
  std::vector<Diagnostic> warnings;
};

}  // namespace veq
