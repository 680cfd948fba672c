// SPDX-License-Identifier: MIT
// The metadata block before a table: key/value lines, and the facts read from them.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "veq/core/error.hpp"
#include "veq/core/run.hpp"

namespace veq::ingest::detail {

struct MetaEntry {
  std::string key;
  std::string value;
  std::size_t line = 0;
};

// "key: value", "key = value" or a two-field "key<sep>value" line; the
// delimiter that comes first wins. A leading '#' is ignored. Returns nothing
// for a line that is not of that shape.
[[nodiscard]] std::optional<MetaEntry> parse_metadata_line(std::string_view line, std::size_t line_no);

// Reads the facts a metadata block states: sample id, sample volume or mass,
// titrant name, kind and concentration, temperature, electrode calibration.
// A value whose unit is not understood is skipped with a warning naming the line.
[[nodiscard]] Facts facts_from_metadata(const std::vector<MetaEntry>& entries,
                                        const std::string& file,
                                        std::vector<Diagnostic>& warnings);

// Titrant kind from a name such as "NaOH 0.1 M" or "hydrochloric acid".
[[nodiscard]] TitrantKind titrant_kind_from_name(std::string_view name);

// A number and the unit text after it ("50,0 mL" -> 50.0, "mL"); '.' or ','
// as the decimal mark.
struct Amount {
  double value = 0.0;
  std::string unit;
};
[[nodiscard]] std::optional<Amount> parse_quantity(std::string_view text);

// Unit conversions for metadata values; nullopt when the unit is not one of
// the quantity's units. Empty unit text means the canonical unit.
[[nodiscard]] std::optional<double> volume_to_mL(const Amount& q);
[[nodiscard]] std::optional<double> mass_to_g(const Amount& q);
[[nodiscard]] std::optional<double> conc_to_mol_L(const Amount& q);
[[nodiscard]] std::optional<double> temperature_to_C(const Amount& q);
// Normality (N, eq/L, meq/L) in equivalents per litre; nullopt for other units.
[[nodiscard]] std::optional<double> normality_to_eq_L(const Amount& q);
// Equivalents per mole of a titrant known by name (2 for H2SO4, 1 for HCl or NaOH); 0 when unknown.
[[nodiscard]] int titrant_equivalents_from_name(std::string_view name);

}  // namespace veq::ingest::detail
