// SPDX-License-Identifier: MIT
// Titer files: a titrant's standardised concentration, written by one run, read by later methods.
#pragma once

#include <filesystem>
#include <string>

namespace veq::method {

struct TiterRecord {
  std::string titrant;
  double concentration_mol_L = 0.0;    // standardised Ct [mol/L]
  double uncertainty_mol_L = 0.0;      // its standard uncertainty [mol/L]
  double nominal_mol_L = 0.0;          // 0 when not known
  std::string standard;                // primary standard used
  std::string source_run;              // file of the standardisation run
  std::string date;                    // from the run's metadata, when it has one
  std::string veq_version;
};

// TOML text of a titer record (stable key order, same record -> same bytes).
[[nodiscard]] std::string titer_to_toml(const TiterRecord& t);

// Reads a titer file. Throws InputError naming the file, line and key.
[[nodiscard]] TiterRecord load_titer(const std::filesystem::path& path);

}  // namespace veq::method
