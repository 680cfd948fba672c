// SPDX-License-Identifier: MIT
// Names of the enums in run.hpp (one table each, used by JSON, CLI and messages).
#include "veq/core/run.hpp"

namespace veq {

std::string_view to_string(SignalKind kind) {
  switch (kind) {
    case SignalKind::ph: return "pH";
    case SignalKind::mv: return "mV";
  }
  return "pH";
}

std::string_view to_string(TitrantKind kind) {
  switch (kind) {
    case TitrantKind::unknown: return "unknown";
    case TitrantKind::base: return "base";
    case TitrantKind::acid: return "acid";
  }
  return "unknown";
}

}  // namespace veq
