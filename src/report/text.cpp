// SPDX-License-Identifier: MIT
// Terminal summary of one run.
#include "veq/report/text.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace veq::report {
namespace {

// Decimals that show a volume to the precision its uncertainty supports (2 significant digits).
int decimals_for(double uncertainty) {
  if (!(uncertainty > 0)) return 3;
  const int d = 1 - static_cast<int>(std::floor(std::log10(uncertainty)));
  return std::clamp(d, 2, 5);
}

}  // namespace

const char* safety_caution() {
  return "Caution: titrations use corrosive acids and bases. Wear eye protection and gloves, handle strong "
         "acids and bases as your lab's procedures require, and follow local codes. veq assists with the "
         "numbers; it does not certify a result.";
}

std::string to_text(const Analysis& a) {
  const Run& run = a.run;
  const Curve& c = a.curve;
  std::string out;
  out += fmt::format("Run {}  ({})\n", run.facts.sample_id, run.source);
  const double v0 = c.volume_mL.empty() ? 0.0 : c.volume_mL.front();
  const double v1 = c.volume_mL.empty() ? 0.0 : c.volume_mL.back();
  out += fmt::format("  {} readings of {}{} from {:.3f} to {:.3f} mL; {:.1f} °C{}; noise {:.2g} {}\n",
                     run.volume_mL.size(), to_string(run.signal), c.converted_from_mv ? " (converted to pH)" : "", v0,
                     v1, c.temperature_C, c.temperature_known ? "" : " (assumed)", c.noise_sd, to_string(c.signal));
  if (run.facts.sample_volume_mL || run.facts.titrant_conc_mol_L) {
    out += "  ";
    if (run.facts.sample_volume_mL) out += fmt::format("sample {:g} mL  ", *run.facts.sample_volume_mL);
    if (run.facts.titrant_conc_mol_L) {
      out += fmt::format("titrant {:g} mol/L", *run.facts.titrant_conc_mol_L);
      if (!run.facts.titrant_name.empty()) out += " (" + run.facts.titrant_name + ")";
    }
    out += "\n";
  }
  const auto& eps = a.endpoints.endpoints;
  if (eps.empty()) out += "  No endpoint found.\n";
  for (std::size_t i = 0; i < eps.size(); ++i) {
    const auto& e = eps[i];
    const int d = decimals_for(e.uncertainty_mL);
    out += fmt::format("  Endpoint {}: {:.{}f} ± {:.{}f} mL at {} {:.{}f}", e.index, e.volume_mL, d, e.uncertainty_mL, d,
                       to_string(c.signal), e.value, c.signal == SignalKind::ph ? 2 : 1);
    out += fmt::format("   [1st derivative {:.{}f}, 2nd derivative {:.{}f} mL]", e.first_derivative_mL.value_or(0), d,
                       e.second_derivative_mL.value_or(0), d);
    if (!e.flags.empty()) {
      out += "  flags:";
      for (const auto& f : e.flags) out += " " + f;
    }
    out += "\n";
    if (i < a.gran.size()) {
      for (const auto* b : {a.gran[i].before ? &*a.gran[i].before : nullptr, a.gran[i].after ? &*a.gran[i].after : nullptr}) {
        if (b == nullptr) continue;
        out += fmt::format("      Gran {}: {:.{}f} ± {:.{}f} mL ({}, {} readings {:.2f}–{:.2f} mL, R² {:.5f}{})", b->after ? "after" : "before",
                           b->volume_mL, d, b->uncertainty_mL, d, signal::to_string(b->function), b->points, b->window_from_mL,
                           b->window_to_mL, b->r2, b->linear ? "" : ", not straight");
        if (b->pKa) out += fmt::format("; pKa {:.2f}{}", *b->pKa, b->pKa_activity_corrected ? "" : " (not corrected for activity)");
        out += "\n";
      }
      if (e.consensus_methods.size() > 1 || e.consensus_methods.front() != "derivative") {
        std::string m;
        for (const auto& x : e.consensus_methods) m += (m.empty() ? "" : " + ") + x;
        out += "      consensus of " + m + "\n";
      }
    }
  }
  if (!a.warnings.empty()) {
    out += "  Warnings:\n";
    for (const auto& w : a.warnings) out += "    " + to_string(w) + "\n";
  }
  return out;
}

}  // namespace veq::report
