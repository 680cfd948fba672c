// SPDX-License-Identifier: MIT
// The analyte table (src/data/analytes.tsv, embedded at build time): substances with their pKa values and sources.
#pragma once

#include <string>
#include <string_view>
#include <vector>

#include "veq/chem/sample.hpp"

namespace veq::chem {

// One row of the table.
struct AnalyteInfo {
  std::string name;                  // "acetic acid"
  std::string formula;               // "CH3COOH"
  std::vector<std::string> aliases;  // other names and formulas it is found by ("KHP")
  AnalyteKind kind = AnalyteKind::weak;
  int top_charge = 0;                 // see Analyte
  int added_form = 0;                 // see Analyte
  std::vector<double> pKa_25C;        // at 25 °C, I -> 0
  std::vector<double> dpKa_dT_per_K;  // empty when not known (taken as 0)
  std::string source;                 // where the pKa values come from
};

// Every row, in table order.
[[nodiscard]] const std::vector<AnalyteInfo>& analyte_table();

// The row whose name, formula or alias equals name, ignoring case and
// surrounding spaces; null when there is none.
[[nodiscard]] const AnalyteInfo* find_analyte(std::string_view name);

// A sample component of that substance at conc_mol_L. Throws InputError
// (source "analyte") naming the known substances when name is not in the table.
[[nodiscard]] Analyte analyte(std::string_view name, double conc_mol_L);

}  // namespace veq::chem
