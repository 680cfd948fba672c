// SPDX-License-Identifier: MIT
// JSON report of one run (schema veq.run/1).
#include "veq/report/json.hpp"

#include <cmath>
#include <map>
#include <nlohmann/json.hpp>

#include "report/fit_sections.hpp"
#include "report/indicator_sections.hpp"

namespace veq::report {
namespace {

using nlohmann::ordered_json;

ordered_json number(double x, int decimals) {
  if (!std::isfinite(x)) return nullptr;  // never reached by design; null rather than NaN
  const double scale = std::pow(10.0, decimals);
  double r = std::round(x * scale) / scale;
  if (r == 0.0) r = 0.0;  // no "-0"
  return r;
}

ordered_json significant(double x, int digits) {
  if (!std::isfinite(x)) return nullptr;
  if (x == 0.0) return 0.0;
  const int mag = static_cast<int>(std::floor(std::log10(std::fabs(x))));
  return number(x, digits - 1 - mag);
}

ordered_json location(const Diagnostic& d) {
  ordered_json w;
  w["code"] = d.code;
  w["message"] = d.message;
  if (d.where.line > 0) w["line"] = d.where.line;
  return w;
}

ordered_json column(const Column& c) {
  ordered_json j;
  j["column"] = c.index + 1;
  j["header"] = c.header;
  j["unit"] = c.unit;
  return j;
}

ordered_json gran_json(const signal::GranBranch& b) {
  ordered_json g;
  g["volume_mL"] = number(b.volume_mL, 6);
  g["uncertainty_mL"] = number(b.uncertainty_mL, 6);
  g["window_mL"] = {number(b.window_from_mL, 6), number(b.window_to_mL, 6)};
  g["r2"] = number(b.r2, 6);
  g["points"] = b.points;
  g["function"] = std::string(signal::to_string(b.function));
  g["linear"] = b.linear;
  if (b.pKa) {
    g["pKa"] = number(*b.pKa, 4);
    if (b.pKa_std_error) g["pKa_std_error"] = significant(*b.pKa_std_error, 3);
    g["pKa_activity_corrected"] = b.pKa_activity_corrected;
    if (b.ionic_strength_mol_L) g["ionic_strength_mol_L"] = significant(*b.ionic_strength_mol_L, 3);
  }
  return g;
}

ordered_json result_json(const method::Result& r) {
  ordered_json j;
  j["name"] = r.name;
  j["value"] = significant(r.value, 8);
  j["unit"] = std::string(method::to_string(r.unit));
  j["uncertainty"] = significant(r.uncertainty, 3);
  j["expanded_uncertainty"] = significant(r.expanded_uncertainty, 3);
  j["coverage_factor"] = 2;
  j["decimals"] = r.decimals;
  j["formula"] = r.formula;
  ordered_json spec = ordered_json::object();
  spec["low"] = r.spec_low ? significant(*r.spec_low, 8) : ordered_json(nullptr);
  spec["high"] = r.spec_high ? significant(*r.spec_high, 8) : ordered_json(nullptr);
  spec["verdict"] = r.verdict.empty() ? ordered_json(nullptr) : ordered_json(r.verdict);
  j["spec"] = std::move(spec);
  ordered_json ep;
  if (r.at_pH)
    ep["at_pH"] = number(*r.at_pH, 3);
  else
    ep["index"] = r.endpoint_index;
  ep["volume_mL"] = number(r.endpoint_volume_mL, 6);
  ep["source"] = r.volume_source;
  j["endpoint"] = std::move(ep);
  ordered_json budget = ordered_json::array();
  for (const auto& b : r.budget) {
    ordered_json bj;
    bj["input"] = b.name;
    bj["value"] = significant(b.value, 8);
    bj["unit"] = b.unit;
    bj["std_uncertainty"] = significant(b.std_uncertainty, 3);
    bj["sensitivity"] = significant(b.sensitivity, 6);
    bj["contribution"] = significant(b.contribution, 3);
    bj["percent"] = number(b.percent, 2);
    budget.push_back(std::move(bj));
  }
  j["budget"] = std::move(budget);
  j["notes"] = r.notes;
  return j;
}

std::string separator_name(char sep) {
  switch (sep) {
    case ',':
      return "comma";
    case ';':
      return "semicolon";
    case '\t':
      return "tab";
    case '|':
      return "bar";
    default:
      return "spaces";
  }
}

}  // namespace

std::string to_json(const Analysis& a) {
  const Run& run = a.run;
  const Curve& c = a.curve;
  ordered_json j;
  j["schema"] = kRunSchema;
  j["veq_version"] = version();

  ordered_json r;
  r["id"] = run.facts.sample_id;
  r["source"] = run.source;
  r["points"] = run.volume_mL.size();
  r["signal"] = std::string(to_string(run.signal));
  ordered_json md = ordered_json::object();
  std::map<std::string, int> seen;
  for (const auto& [k, v] : run.metadata) {
    std::string key = k;
    if (int n = ++seen[k]; n > 1) key += " (" + std::to_string(n) + ")";
    md[key] = v;
  }
  r["metadata"] = std::move(md);
  ordered_json facts = ordered_json::object();
  if (run.facts.sample_volume_mL) facts["sample_volume_mL"] = number(*run.facts.sample_volume_mL, 6);
  if (run.facts.sample_mass_g) facts["sample_mass_g"] = number(*run.facts.sample_mass_g, 6);
  if (!run.facts.titrant_name.empty()) facts["titrant"] = run.facts.titrant_name;
  facts["titrant_kind"] = std::string(to_string(run.facts.titrant_kind));
  if (run.facts.titrant_conc_mol_L) facts["titrant_conc_mol_L"] = significant(*run.facts.titrant_conc_mol_L, 8);
  if (run.facts.temperature_C) facts["temperature_C"] = number(*run.facts.temperature_C, 3);
  // What Gran and the fit used: a method's sample volume and titrant concentration (titer applied) win.
  if (a.used_sample_volume_mL) facts["used_sample_volume_mL"] = number(*a.used_sample_volume_mL, 6);
  if (a.used_titrant_conc_mol_L) facts["used_titrant_conc_mol_L"] = significant(*a.used_titrant_conc_mol_L, 8);
  r["facts"] = std::move(facts);
  ordered_json dialect;
  dialect["encoding"] = run.dialect.encoding;
  dialect["line_ending"] = run.dialect.line_ending;
  dialect["separator"] = separator_name(run.dialect.separator);
  dialect["decimal"] = std::string(1, run.dialect.decimal);
  dialect["header_line"] = run.dialect.header_line;
  dialect["first_data_line"] = run.dialect.first_data_line;
  r["dialect"] = std::move(dialect);
  ordered_json cols;
  cols["volume"] = column(run.volume_column);
  cols["signal"] = column(run.signal_column);
  if (run.temperature_column) cols["temperature"] = column(*run.temperature_column);
  if (run.time_column) cols["time"] = column(*run.time_column);
  r["columns"] = std::move(cols);
  if (!run.volume_mL.empty()) {
    r["volume_range_mL"] = {number(run.volume_mL.front(), 6), number(run.volume_mL.back(), 6)};
  }
  r["notes"] = run.notes;
  j["run"] = std::move(r);

  const bool ph = c.signal == SignalKind::ph;
  const int level_decimals = ph ? 4 : 3;
  ordered_json cj;
  cj["signal"] = std::string(to_string(c.signal));
  cj["points"] = c.volume_mL.size();
  cj["converted_from_mV"] = c.converted_from_mv;
  cj["direction"] = c.direction > 0 ? "rising" : "falling";
  cj["noise_sd"] = significant(c.noise_sd, 3);
  cj["temperature_C"] = number(c.temperature_C, 3);
  cj["temperature_known"] = c.temperature_known;
  std::size_t spikes = 0;
  for (auto s : c.spike) spikes += s;
  cj["spikes"] = std::move(spikes);
  cj["derivative_window_points"] = a.endpoints.derivatives.window_points;
  j["curve"] = std::move(cj);

  ordered_json eps = ordered_json::array();
  for (std::size_t i = 0; i < a.endpoints.endpoints.size(); ++i) {
    const auto& e = a.endpoints.endpoints[i];
    ordered_json ej;
    ej["index"] = e.index;
    ej["volume_mL"] = number(e.volume_mL, 6);
    ej["uncertainty_mL"] = number(e.uncertainty_mL, 6);
    ej[ph ? "pH" : "mV"] = number(e.value, level_decimals);
    ej["level_method"] = e.value_method;
    ordered_json methods = ordered_json::object();
    methods["derivative"]["volume_mL"] = number(e.derivative_volume_mL, 6);
    methods["derivative"]["uncertainty_mL"] = number(e.derivative_uncertainty_mL, 6);
    if (e.first_derivative_mL) methods["first_derivative"]["volume_mL"] = number(*e.first_derivative_mL, 6);
    if (e.second_derivative_mL) methods["second_derivative"]["volume_mL"] = number(*e.second_derivative_mL, 6);
    if (i < a.gran.size()) {
      if (a.gran[i].before) methods["gran"] = gran_json(*a.gran[i].before);
      if (a.gran[i].after) methods["gran_after"] = gran_json(*a.gran[i].after);
    }
    detail::add_endpoint_fit(methods, a, e.index);
    ej["methods"] = std::move(methods);
    ej["consensus_methods"] = e.consensus_methods;
    ej["consensus_left_out"] = e.consensus_left_out;
    ej["peak_slope"] = significant(e.peak_slope, 6);
    ej["snr"] = significant(e.snr, 3);
    ej["flags"] = e.flags;
    detail::add_endpoint_indicators(ej, a, e.index);
    eps.push_back(std::move(ej));
  }
  j["endpoints"] = std::move(eps);
  j["fit"] = detail::fit_json(a);
  if (a.results || !a.results_error.empty()) {
    ordered_json mj;
    mj["name"] = a.results ? a.results->method_name : std::string();
    mj["file"] = a.results ? a.results->method_path : std::string();
    j["method"] = std::move(mj);
    ordered_json rs = ordered_json::array();
    if (a.results) {
      for (const auto& r : a.results->results) rs.push_back(result_json(r));
    }
    j["result"] = rs.empty() ? ordered_json(nullptr) : rs.front();
    j["results"] = std::move(rs);
    if (!a.results_error.empty()) j["result_error"] = a.results_error;
    if (a.results) {
      j["acceptance_failures"] = a.results->acceptance_failures;
      j["method_conflicts"] = a.results->conflicts;
      if (a.results->titer) {
        const auto& t = *a.results->titer;
        ordered_json tj;
        tj["titrant"] = t.titrant;
        tj["concentration_mol_L"] = significant(t.concentration_mol_L, 6);
        tj["uncertainty_mol_L"] = significant(t.uncertainty_mol_L, 3);
        if (t.nominal_mol_L > 0) tj["titer"] = number(t.concentration_mol_L / t.nominal_mol_L, 5);
        j["titer"] = std::move(tj);
      }
    }
  }
  ordered_json ws = ordered_json::array();
  for (const auto& w : a.warnings) ws.push_back(location(w));
  j["warnings"] = std::move(ws);
  return j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) + "\n";
}

}  // namespace veq::report
