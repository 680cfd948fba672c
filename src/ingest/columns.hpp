// SPDX-License-Identifier: MIT
// Recognising a column from its header: which quantity, in which unit.
#pragma once

#include <optional>
#include <string>
#include <string_view>

namespace veq::ingest::detail {

enum class Quantity { none, volume, ph, potential, temperature, time, derived };

// A unit ingest knows, with the conversion to the canonical unit of its
// quantity: canonical = value * factor + offset (mL, pH, mV, °C, s).
struct UnitInfo {
  Quantity quantity = Quantity::none;
  std::string name;  // canonical spelling: mL, uL, L, pH, mV, V, degC, K, s, min, h, ms
  double factor = 1.0;
  double offset = 0.0;
};

// Looks up a unit as written ("mL", "µl", "°C", "mV", "min", ...).
[[nodiscard]] std::optional<UnitInfo> find_unit(std::string_view text);

// What a header says about its column.
struct HeaderInfo {
  Quantity quantity = Quantity::none;  // none: not recognised (ignored)
  std::optional<UnitInfo> unit;        // the unit when one was written and known
  std::string unit_text;               // the unit as written, when one was written
  bool unit_unknown = false;           // a unit was written but is not one we know
};

// Classifies one header cell, e.g. "Volume (mL)", "V/mL", "titrant_uL",
// "E (mV)", "Temp/°C", "ml NaOH", "dpH/dV" (derived: ignored).
[[nodiscard]] HeaderInfo classify_header(std::string_view header);

[[nodiscard]] std::string_view quantity_name(Quantity q);

}  // namespace veq::ingest::detail
