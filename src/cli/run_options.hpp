// SPDX-License-Identifier: MIT
// Options shared by every subcommand that reads runs: ingest overrides and run facts.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include <CLI/CLI.hpp>

#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/method/method.hpp"

namespace veq::cli {

struct RunOptions {
  std::optional<double> sample_volume_mL;
  std::optional<double> titrant_conc_mol_L;
  std::string titrant;  // "acid" or "base"
  std::optional<double> temperature_C;
  std::string columns;
  std::string volume_unit;
  std::string signal;   // "pH" or "mV"
  bool sort = false;
  double max_size_MiB = 64;
  std::optional<double> e0_mV;
  std::optional<double> slope_mV;
  std::string buffers;  // "pH1:E1,pH2:E2"
  int window = 0;
  std::optional<double> min_height;
  std::optional<double> min_separation_mL;
  std::string gran_window;  // "from:to" [mL]
  std::string method_file;  // --method
  std::optional<int> analyte_charge;  // --analyte-charge
  std::optional<double> drop_volume_mL;  // --drop-volume: one drop from the burette [mL]
  // The charge-balance fit.
  bool no_fit = false;                 // --no-fit
  std::string model;                   // --model: a model kind or an analyte-table substance ("" = choose)
  bool fit_titer = false;              // --fit-titer
  bool fit_carbonate = false;          // --fit-carbonate
  bool fix_electrode = false;          // --fix-electrode
  std::vector<std::string> fit_hold;   // --fit-hold NAME=VALUE (repeatable)
  std::string fit_loss;                // --fit-loss huber|cauchy|none
  std::optional<double> fit_loss_scale;  // --fit-loss-scale (noise SDs)
  std::string fit_criterion;           // --fit-criterion aicc|bic
  bool fit_ideal = false;              // --fit-ideal: activity coefficients 1
  std::optional<double> ionic_strength_mol_L;  // --ionic-strength: background electrolyte of the sample [mol/L]
};

// Adds the shared options to a subcommand.
void add_run_options(CLI::App* cmd, RunOptions& o);

// The ingest options these stand for. Throws InputError for a bad value.
[[nodiscard]] ingest::IngestOptions ingest_options(const RunOptions& o);

// The analysis options these stand for. Throws InputError for a bad value.
[[nodiscard]] AnalyzeOptions analyze_options(const RunOptions& o, double temperature_C);

// The method named by --method, loaded (nullopt without one). Throws InputError.
[[nodiscard]] std::optional<method::Method> load_method_option(const RunOptions& o);

// The command line wins over the file's metadata.
void apply_facts(const RunOptions& o, Run& run);

// Every option above as one canonical line (numbers to 17 digits), for a
// batch's resumability key: a run is redone when any of them changes.
[[nodiscard]] std::string fingerprint(const RunOptions& o);

}  // namespace veq::cli
