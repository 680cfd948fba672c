// SPDX-License-Identifier: MIT
// JSON and terminal renderings of the charge-balance fit.
#include "report/fit_sections.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace veq::report::detail {
namespace {

using nlohmann::ordered_json;

ordered_json rounded(double x, int decimals) {
  if (!std::isfinite(x)) return nullptr;  // never reached by design; null rather than NaN
  const double scale = std::pow(10.0, decimals);
  double r = std::round(x * scale) / scale;
  if (r == 0.0) r = 0.0;
  return r;
}

ordered_json significant(double x, int digits) {
  if (!std::isfinite(x)) return nullptr;
  if (x == 0.0) return 0.0;
  const int mag = static_cast<int>(std::floor(std::log10(std::fabs(x))));
  return rounded(x, digits - 1 - mag);
}

ordered_json optional_significant(const std::optional<double>& x, int digits) {
  return x ? significant(*x, digits) : ordered_json(nullptr);
}

const fit::FittedEquivalence* matched(const Analysis& a, int endpoint_index) {
  if (!a.fit.usable()) return nullptr;
  for (const auto& fe : a.fit.best->equivalence) {
    if (fe.endpoint_index == endpoint_index && fe.uncertainty_mL) return &fe;
  }
  return nullptr;
}

}  // namespace

// Decimals that show a value to two significant digits of its standard error.
std::string set_aside_text(const std::string& set_aside) {
  if (set_aside == "parameter_at_bound") return ", set aside: a parameter on its bound";
  if (set_aside == "steps_merged") return ", set aside: two titrated steps too close to tell from one";
  if (set_aside == "step_out_of_reach") return ", set aside: a step's pKa beyond the readings' pH";
  return set_aside.empty() ? std::string() : ", set aside: " + set_aside;
}

int parameter_decimals(const std::optional<double>& se, double value) {
  if (se && *se > 0.0 && std::isfinite(*se))
    return std::clamp(1 - static_cast<int>(std::floor(std::log10(*se))), 0, 10);
  if (value != 0.0 && std::isfinite(value))
    return std::clamp(4 - static_cast<int>(std::floor(std::log10(std::fabs(value)))), 0, 10);
  return 4;
}

ordered_json fit_json(const Analysis& a) {
  const fit::FitResult& r = a.fit;
  ordered_json j;
  j["status"] = std::string(fit::to_string(r.status));
  j["message"] = r.message;
  j["criterion"] = std::string(fit::to_string(r.criterion));
  j["usable"] = r.usable();
  if (!r.best) {
    j["model"] = nullptr;
    j["parameters"] = ordered_json::array();
    j["equivalence_volumes_mL"] = ordered_json::array();
    j["residual_sd"] = nullptr;
    j["iterations"] = 0;
    j["converged"] = false;
    j["runner_up"] = nullptr;
    j["flags"] = r.flags;
    return j;
  }
  const fit::FitSummary& b = *r.best;
  const bool ph = b.signal == SignalKind::ph;
  j["model"] = b.model;
  j["score"] = rounded(b.score, 3);
  j["points"] = b.points;
  ordered_json params = ordered_json::array();
  for (const auto& p : b.parameters) {
    ordered_json q;
    q["name"] = p.name;
    q["value"] = significant(p.value, 10);
    q["std_error"] = optional_significant(p.std_error, 3);
    if (p.ci95_low && p.ci95_high)
      q["ci95"] = {significant(*p.ci95_low, 10), significant(*p.ci95_high, 10)};
    else
      q["ci95"] = nullptr;
    q["unit"] = p.unit;
    q["fixed"] = p.fixed;
    params.push_back(std::move(q));
  }
  j["parameters"] = std::move(params);
  ordered_json corr;
  corr["parameters"] = b.correlation_names;
  ordered_json m = ordered_json::array();
  for (const auto& row : b.correlation) {
    ordered_json jr = ordered_json::array();
    for (double c : row) jr.push_back(rounded(c, 4));
    m.push_back(std::move(jr));
  }
  corr["matrix"] = std::move(m);
  j["correlation"] = std::move(corr);
  ordered_json veq = ordered_json::array(), veq_u = ordered_json::array(), veq_ep = ordered_json::array();
  ordered_json beyond = ordered_json::array();
  for (const auto& fe : b.equivalence) {
    if (!fe.in_range) {
      beyond.push_back(rounded(fe.volume_mL, 6));
      continue;
    }
    veq.push_back(rounded(fe.volume_mL, 6));
    veq_u.push_back(fe.uncertainty_mL ? rounded(*fe.uncertainty_mL, 6) : ordered_json(nullptr));
    veq_ep.push_back(fe.endpoint_index > 0 ? ordered_json(fe.endpoint_index) : ordered_json(nullptr));
  }
  j["equivalence_volumes_mL"] = std::move(veq);
  j["equivalence_uncertainties_mL"] = std::move(veq_u);
  j["equivalence_endpoints"] = std::move(veq_ep);
  j["equivalence_beyond_readings_mL"] = std::move(beyond);
  j["residual_unit"] = ph ? "pH" : "mV";
  j["residual_sd"] = significant(b.residual_sd, 3);
  j["scale_sd"] = significant(b.scale_sd, 3);
  j["iterations"] = b.iterations;
  j["converged"] = b.status == fit::FitStatus::converged;
  j["termination"] = b.termination;
  if (r.runner_up) {
    ordered_json ru;
    ru["model"] = r.runner_up->model;
    ru["score"] = rounded(r.runner_up->score, 3);
    ru["set_aside"] = r.runner_up->set_aside.empty() ? ordered_json(nullptr) : ordered_json(r.runner_up->set_aside);
    j["runner_up"] = std::move(ru);
  } else {
    j["runner_up"] = nullptr;
  }
  ordered_json cands = ordered_json::array();
  for (const auto& c : r.candidates) {
    ordered_json cj;
    cj["model"] = c.model;
    cj["score"] = rounded(c.score, 3);
    cj["free_parameters"] = c.free_parameters;
    cj["readings"] = c.readings;
    cj["set_aside"] = c.set_aside.empty() ? ordered_json(nullptr) : ordered_json(c.set_aside);
    cands.push_back(std::move(cj));
  }
  j["candidates"] = std::move(cands);
  ordered_json rt;
  rt["runs"] = b.residual_tests.runs;
  rt["expected_runs"] = rounded(b.residual_tests.expected_runs, 3);
  rt["runs_z"] = rounded(b.residual_tests.runs_z, 3);
  rt["runs_p"] = significant(b.residual_tests.runs_p, 3);
  rt["runs_tested"] = b.residual_tests.runs_tested;
  rt["durbin_watson"] = rounded(b.residual_tests.durbin_watson, 4);
  j["residual_tests"] = std::move(rt);
  ordered_json flags = b.flags;
  for (const auto& f : r.flags) flags.push_back(f);
  j["flags"] = std::move(flags);
  return j;
}

void add_endpoint_fit(ordered_json& methods, const Analysis& a, int endpoint_index) {
  const fit::FittedEquivalence* fe = matched(a, endpoint_index);
  if (fe == nullptr) return;
  methods["fit"]["volume_mL"] = rounded(fe->volume_mL, 6);
  methods["fit"]["uncertainty_mL"] = rounded(*fe->uncertainty_mL, 6);
}

std::string endpoint_fit_line(const Analysis& a, int endpoint_index) {
  const fit::FittedEquivalence* fe = matched(a, endpoint_index);
  if (fe == nullptr) return {};
  const int d = std::clamp(parameter_decimals(fe->uncertainty_mL, fe->volume_mL), 2, 6);
  // Below the last decimal shown: said so, not printed as a zero uncertainty.
  const std::string u = *fe->uncertainty_mL < 0.5 * std::pow(10.0, -d) ? fmt::format("< {:.{}f}", std::pow(10.0, -d), d)
                                                                       : fmt::format("{:.{}f}", *fe->uncertainty_mL, d);
  return fmt::format("      Fit: {:.{}f} ± {} mL ({})\n", fe->volume_mL, d, u, a.fit.best->model);
}

std::string fit_block(const Analysis& a) {
  const fit::FitResult& r = a.fit;
  if (!r.best) {
    if (r.status == fit::FitStatus::failed) return "  Fit (charge balance): failed: " + r.message + "\n";
    return {};  // skipped: the warning says why
  }
  const fit::FitSummary& b = *r.best;
  const char* unit = b.signal == SignalKind::ph ? "pH" : "mV";
  std::string out = fmt::format("  Fit (charge balance): {}, {} readings, residual SD {:.2g} {}, {} iterations{}",
                                b.model,
                                b.points,
                                b.residual_sd,
                                unit,
                                b.iterations,
                                b.status == fit::FitStatus::converged ? "" : " (not converged)");
  if (r.runner_up) {
    out += fmt::format("; runner-up {} ({} {:+.1f}{})",
                       r.runner_up->model,
                       fit::to_string(r.criterion),
                       r.runner_up->score - b.score,
                       set_aside_text(r.runner_up->set_aside));
  }
  out += "\n     ";
  bool first = true;
  for (const auto& p : b.parameters) {
    const int d = parameter_decimals(p.std_error, p.value);
    out += first ? " " : "; ";
    first = false;
    const std::string u = p.unit.empty() ? "" : " " + p.unit;
    if (p.fixed) {
      out += fmt::format("{} = {:.{}f}{} (held)", p.name, p.value, d, u);
    } else if (p.std_error && p.ci95_low && p.ci95_high) {
      out += fmt::format("{} = {:.{}f} ± {:.{}f}{} [95 % {:.{}f} to {:.{}f}]",
                         p.name,
                         p.value,
                         d,
                         *p.std_error,
                         d,
                         u,
                         *p.ci95_low,
                         d,
                         *p.ci95_high,
                         d);
    } else {
      out += fmt::format("{} = {:.{}f}{}", p.name, p.value, d, u);
    }
  }
  out += "\n";
  std::vector<std::string> flags = b.flags;
  if (!flags.empty()) {
    out += "      fit flags:";
    for (const auto& f : flags) out += " " + f;
    out += r.usable() ? "\n" : "  (not used beside the endpoints)\n";
  }
  return out;
}

}  // namespace veq::report::detail
