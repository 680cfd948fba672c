// SPDX-License-Identifier: MIT
// Terminal summary of one run.
#include "veq/report/text.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "report/fit_sections.hpp"
#include "report/indicator_sections.hpp"

namespace veq::report {
namespace {

// Decimals that show a volume to the precision its uncertainty supports (2 significant digits).
int decimals_for(double uncertainty) {
  if (!(uncertainty > 0)) return 3;
  const int d = 1 - static_cast<int>(std::floor(std::log10(uncertainty)));
  return std::clamp(d, 2, 6);  // a fit's u can be a few µL: six decimals keep two of its digits
}

}  // namespace

const char* safety_caution() {
  return "Caution: titrations use corrosive acids and bases. Wear eye protection and gloves, handle strong "
         "acids and bases as your lab's procedures require, and follow local codes. veq assists with the "
         "numbers; it does not certify a result.";
}

std::string spec_text(const std::optional<double>& low, const std::optional<double>& high, int max_decimals) {
  // Decimals a limit needs to be shown exactly (up to max_decimals): 6.5 -> 1, 400 -> 0.
  auto needed = [max_decimals](double v) {
    for (int d = 0; d < max_decimals; ++d) {
      const double scaled = v * std::pow(10.0, d);
      if (std::fabs(scaled - std::round(scaled)) < 1e-9 * std::max(1.0, std::fabs(scaled))) return d;
    }
    return max_decimals;
  };
  int d = 0;
  if (low) d = std::max(d, needed(*low));
  if (high) d = std::max(d, needed(*high));
  if (low && high) return fmt::format("{:.{}f} to {:.{}f}", *low, d, *high, d);
  if (low) return fmt::format("\xE2\x89\xA5 {:.{}f}", *low, d);
  if (high) return fmt::format("\xE2\x89\xA4 {:.{}f}", *high, d);
  return {};
}

std::string to_text(const Analysis& a) {
  const Run& run = a.run;
  const Curve& c = a.curve;
  std::string out;
  out += fmt::format("Run {}  ({})\n", run.facts.sample_id, run.source);
  const double v0 = c.volume_mL.empty() ? 0.0 : c.volume_mL.front();
  const double v1 = c.volume_mL.empty() ? 0.0 : c.volume_mL.back();
  out += fmt::format("  {} readings of {}{} from {:.3f} to {:.3f} mL; {:.1f} °C{}; noise {:.2g} {}\n",
                     run.volume_mL.size(),
                     to_string(run.signal),
                     c.converted_from_mv ? " (converted to pH)" : "",
                     v0,
                     v1,
                     c.temperature_C,
                     c.temperature_known ? "" : " (assumed)",
                     c.noise_sd,
                     to_string(c.signal));
  if (run.facts.sample_volume_mL || run.facts.titrant_conc_mol_L || a.used_sample_volume_mL ||
      a.used_titrant_conc_mol_L) {
    // What the chemistry used (a method's values win), and the file's value beside it when it differs.
    auto differs = [](const std::optional<double>& a, const std::optional<double>& b) {
      return a && b && std::fabs(*a - *b) > 1e-9 * std::max(std::fabs(*a), std::fabs(*b));
    };
    const std::optional<double> v = a.used_sample_volume_mL ? a.used_sample_volume_mL : run.facts.sample_volume_mL;
    const std::optional<double> ct =
        a.used_titrant_conc_mol_L ? a.used_titrant_conc_mol_L : run.facts.titrant_conc_mol_L;
    out += "  ";
    if (v) {
      out += fmt::format("sample {:g} mL", *v);
      if (differs(v, run.facts.sample_volume_mL))
        out += fmt::format(" (from the method; the file says {:g})", *run.facts.sample_volume_mL);
      out += "  ";
    }
    if (ct) {
      out += fmt::format("titrant {:g} mol/L", *ct);
      if (differs(ct, run.facts.titrant_conc_mol_L))
        out += fmt::format(" (from the method; the file says {:g})", *run.facts.titrant_conc_mol_L);
      if (!run.facts.titrant_name.empty()) out += " (" + run.facts.titrant_name + ")";
    }
    out += "\n";
  }
  const auto& eps = a.endpoints.endpoints;
  if (eps.empty()) out += "  No endpoint found.\n";
  for (std::size_t i = 0; i < eps.size(); ++i) {
    const auto& e = eps[i];
    const int d = decimals_for(e.uncertainty_mL);
    out += fmt::format("  Endpoint {}: {:.{}f} ± {:.{}f} mL at {} {:.{}f}",
                       e.index,
                       e.volume_mL,
                       d,
                       e.uncertainty_mL,
                       d,
                       to_string(c.signal),
                       e.value,
                       c.signal == SignalKind::ph ? 2 : 1);
    out += fmt::format("   [1st derivative {:.{}f}, 2nd derivative {:.{}f} mL]",
                       e.first_derivative_mL.value_or(0),
                       d,
                       e.second_derivative_mL.value_or(0),
                       d);
    if (!e.flags.empty()) {
      out += "  flags:";
      for (const auto& f : e.flags) out += " " + f;
    }
    out += "\n";
    if (i < a.gran.size()) {
      for (const auto* b :
           {a.gran[i].before ? &*a.gran[i].before : nullptr, a.gran[i].after ? &*a.gran[i].after : nullptr}) {
        if (b == nullptr) continue;
        out += fmt::format("      Gran {}: {:.{}f} ± {:.{}f} mL ({}, {} readings {:.2f}–{:.2f} mL, R² {:.5f}{})",
                           b->after ? "after" : "before",
                           b->volume_mL,
                           d,
                           b->uncertainty_mL,
                           d,
                           signal::to_string(b->function),
                           b->points,
                           b->window_from_mL,
                           b->window_to_mL,
                           b->r2,
                           b->linear ? "" : ", not straight");
        if (b->pKa)
          out +=
              fmt::format("; pKa {:.2f}{}", *b->pKa, b->pKa_activity_corrected ? "" : " (not corrected for activity)");
        const std::string name = b->after ? "gran_after" : "gran_before";
        if (std::find(e.consensus_left_out.begin(), e.consensus_left_out.end(), name) != e.consensus_left_out.end())
          out +=
              "; left out of the consensus (its ± is statistical: activity or chemistry the line does not "
              "allow for moves it)";
        out += "\n";
      }
      out += detail::endpoint_fit_line(a, e.index);
      if (e.consensus_methods.size() > 1 || e.consensus_methods.front() != "derivative") {
        std::string m;
        for (const auto& x : e.consensus_methods) m += (m.empty() ? "" : " + ") + x;
        out += "      consensus of " + m + "\n";
      }
    }
    out += detail::endpoint_indicators_line(a, e.index);
  }
  out += detail::fit_block(a);
  if (a.results) {
    out += "  Method: " + a.results->method_name + "\n";
    for (const auto& r : a.results->results) {
      const int dd = r.decimals;
      out += fmt::format("  Result: {} = {:.{}f} {}, U = {:.{}f} (k = 2)",
                         r.name,
                         r.value,
                         dd,
                         method::to_string(r.unit),
                         r.expanded_uncertainty,
                         dd);
      if (r.at_pH)
        out += fmt::format("  [volume at pH {:g}: {:.3f} mL]", *r.at_pH, r.endpoint_volume_mL);
      else
        out += fmt::format(
            "  [endpoint {}, {} volume {:.4f} mL]", r.endpoint_index, r.volume_source, r.endpoint_volume_mL);
      if (!r.verdict.empty()) {
        out += "  spec " + spec_text(r.spec_low, r.spec_high, std::max(dd, 1)) + ": " + r.verdict;
      }
      out += "\n";
      out += "      " + r.formula + "; uncertainty budget:";
      for (const auto& b : r.budget) out += fmt::format(" {} {:.0f} %,", b.name, b.percent);
      if (!r.budget.empty()) out.pop_back();
      out += "\n";
      for (const auto& n : r.notes) out += "      note: " + n + "\n";
    }
    for (const auto& f : a.results->acceptance_failures) out += "  Acceptance failed: " + f + "\n";
    for (const auto& c : a.results->conflicts) out += "  Check: " + c + "\n";
    if (a.results->titer) {
      const auto& t = *a.results->titer;
      out += fmt::format("  Titrant {}: {:.5f} mol/L, standard uncertainty {:.5f}",
                         t.titrant.empty() ? std::string("concentration") : t.titrant,
                         t.concentration_mol_L,
                         t.uncertainty_mol_L);
      if (t.nominal_mol_L > 0)
        out += fmt::format(
            " (titer {:.4f} of the nominal {:g})", t.concentration_mol_L / t.nominal_mol_L, t.nominal_mol_L);
      out += "\n";
    }
  } else if (!a.results_error.empty()) {
    out += "  No result: " + a.results_error + "\n";
  }
  if (!a.warnings.empty()) {
    out += "  Warnings:\n";
    for (const auto& w : a.warnings) out += "    " + to_string(w) + "\n";
  }
  out += std::string("  ") + safety_caution() + "\n";
  return out;
}

}  // namespace veq::report
