// SPDX-License-Identifier: MIT
// Indicator results in the run reports, the indicator table listing and the cross-check report.
#include "veq/report/indicators.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "report/indicator_sections.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace veq::report {
namespace {

using nlohmann::ordered_json;

// Rounded to decimals; null for a missing or non-finite number (never NaN in
// a report). Same rounding rule as json.cpp.
ordered_json number(std::optional<double> x, int decimals) {
  if (!x || !std::isfinite(*x)) return nullptr;
  const double scale = std::pow(10.0, decimals);
  double r = std::round(*x * scale) / scale;
  if (r == 0.0) r = 0.0;  // no "-0"
  return r;
}

constexpr int kVolumeDecimals = 6;   // [mL], as the run report
constexpr int kPHDecimals = 4;       // [pH], as the run report
constexpr int kPercentDecimals = 4;  // [%]
constexpr int kDropDecimals = 2;     // [drops]

ordered_json colour(const indicators::Colour& c) {
  ordered_json j;
  j["name"] = c.name;
  j["sRGB"] = c.srgb_hex;
  return j;
}

ordered_json change_json(const indicators::ColourChange& c, const std::string& method) {
  ordered_json j;
  j["name"] = c.indicator.name;
  j["range_pH"] = {number(c.indicator.low_pH, 2), number(c.indicator.high_pH, 2)};
  j["pK_In"] = number(c.indicator.pK_In, 2);
  j["acid_colour"] = colour(c.indicator.acid_colour);
  j["base_colour"] = colour(c.indicator.base_colour);
  j["seen_pH"] = number(c.transition.seen_pH, kPHDecimals);
  j["seen_as"] = c.transition.seen_at_end ? "colour_vanishes" : "first_change";
  j["seen_mL"] = number(c.seen_mL, kVolumeDecimals);
  j["seen_uncertainty_mL"] = number(c.seen_uncertainty_mL, kVolumeDecimals);
  j["change_pH"] = {number(c.transition.begin_pH, kPHDecimals), number(c.transition.end_pH, kPHDecimals)};
  j["change_mL"] = {number(c.begin_mL, kVolumeDecimals), number(c.end_mL, kVolumeDecimals)};
  j["error_percent"] = number(c.error_percent, kPercentDecimals);
  j["error_uncertainty_percent"] = number(c.error_uncertainty_percent, kPercentDecimals);
  j["correction_mL"] = number(c.correction_mL, kVolumeDecimals);
  j["span_mL"] = number(c.span_mL, kVolumeDecimals);
  j["span_drops"] = number(c.span_drops, kDropDecimals);
  j["tolerance_percent"] = number(c.tolerance_percent, kPercentDecimals);
  j["verdict"] = std::string(indicators::to_string(c.verdict));
  j["curve"] = method;
  if (!c.note.empty()) j["note"] = c.note;
  return j;
}

const indicators::EndpointIndicators* find_endpoint(const Analysis& a, int index) {
  for (const auto& e : a.indicators.endpoints) {
    if (e.endpoint_index == index) return &e;
  }
  return nullptr;
}

std::string verdict_words(indicators::Verdict v) {
  switch (v) {
    case indicators::Verdict::suitable:
      return "suitable";
    case indicators::Verdict::usable_with_correction:
      return "usable with a correction";
    case indicators::Verdict::unsuitable:
      return "unsuitable";
  }
  return "unsuitable";
}

std::string short_change(const indicators::ColourChange& c) {
  std::string s = c.indicator.name + " " + verdict_words(c.verdict);
  if (c.error_percent) {
    const double e = *c.error_percent, u = c.error_uncertainty_percent.value_or(0.0);
    // "-0.00 ± 0.00 %" says nothing: below 0.005 % both read "< 0.01".
    if (std::fabs(e) < 0.005 && u < 0.005)
      s += " (error < 0.01 %)";
    else if (u < 0.005)
      s += fmt::format(" ({:+.2f} %, ± < 0.01)", e);
    else
      s += fmt::format(" ({:+.2f} ± {:.2f} %)", std::fabs(e) < 0.005 ? 0.0 : e, u);
  } else
    s += " (not seen)";
  return s;
}

std::string range_text(const indicators::Indicator& i) {
  return fmt::format("{:.1f}-{:.1f}", i.low_pH, i.high_pH);
}

}  // namespace

namespace detail {

void add_endpoint_indicators(ordered_json& ej, const Analysis& a, int endpoint_index) {
  ordered_json list = ordered_json::array();
  ordered_json also = ordered_json::array();
  if (const auto* e = find_endpoint(a, endpoint_index)) {
    for (const auto& c : e->candidates) list.push_back(change_json(c, a.indicators.curve_method));
    for (const auto& n : e->also_suitable) also.push_back(n);
  }
  ej["indicators"] = std::move(list);
  ej["indicators_also_suitable"] = std::move(also);
}

std::string endpoint_indicators_line(const Analysis& a, int endpoint_index) {
  const auto* e = find_endpoint(a, endpoint_index);
  if (e == nullptr || !e->endpoint_pH) return {};
  constexpr std::size_t kShown = 2;      // candidates named on the line
  constexpr std::size_t kAlsoShown = 3;  // other suitable indicators named
  std::string line = "    Indicators: ";
  if (e->candidates.empty()) {
    line += fmt::format("none in the table changes colour at pH {:.2f}", *e->endpoint_pH);
  } else {
    // The line leads with the indicators a chemist would use: suitable first, then usable
    // with a correction, then the rest (each group closest midpoint first, as listed).
    std::vector<std::size_t> order(e->candidates.size());
    for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
    auto rank = [&](std::size_t i) {
      const auto v = e->candidates[i].verdict;
      return v == indicators::Verdict::suitable ? 0 : v == indicators::Verdict::usable_with_correction ? 1 : 2;
    };
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return rank(a) < rank(b); });
    for (std::size_t i = 0; i < order.size() && i < kShown; ++i) {
      line += (i ? ", " : "") + short_change(e->candidates[order[i]]);
    }
    if (e->candidates.size() > kShown) line += fmt::format(", {} more", e->candidates.size() - kShown);
  }
  if (!e->also_suitable.empty()) {
    line += "; also suitable: ";
    for (std::size_t i = 0; i < e->also_suitable.size() && i < kAlsoShown; ++i) {
      line += (i ? ", " : "") + e->also_suitable[i];
    }
    if (e->also_suitable.size() > kAlsoShown) line += fmt::format(" and {} more", e->also_suitable.size() - kAlsoShown);
  }
  return line + "\n";
}

}  // namespace detail

std::string indicator_table_text(const std::vector<const indicators::Indicator*>& rows,
                                 std::optional<double> pH,
                                 bool with_sources) {
  std::string out;
  if (pH) {
    if (rows.empty()) {
      out += fmt::format("No indicator in the table changes colour at pH {:.2f}.\n", *pH);
    } else {
      out += fmt::format("Indicators whose transition range contains pH {:.2f}, closest midpoint first:\n", *pH);
    }
  }
  const auto colours = [](const indicators::Indicator& r) { return r.acid_colour.name + " -> " + r.base_colour.name; };
  std::size_t width = 9;
  std::size_t colour_width = 19;
  for (const auto* r : rows) {
    width = std::max(width, r->name.size());
    colour_width = std::max(colour_width, colours(*r).size());
  }
  if (!rows.empty()) {
    out += fmt::format("  {:<{}}  {:<9}  {:>6}  {:<{}}",
                       "Indicator",
                       width,
                       "pH range",
                       "pK(In)",
                       "acid -> base colour",
                       pH ? colour_width : 0);
    if (pH) out += "  |mid - pH|";
    out += "\n";
  }
  for (const auto* r : rows) {
    out += fmt::format("  {:<{}}  {:<9}  {:>6.2f}  {:<{}}",
                       r->name,
                       width,
                       range_text(*r),
                       r->pK_In,
                       colours(*r),
                       pH ? colour_width : 0);
    if (pH) out += fmt::format("  {:>10.2f}", std::fabs(r->midpoint_pH() - *pH));
    out += "\n";
    if (with_sources) out += fmt::format("  {:<{}}  source: {}\n", "", width, r->source);
  }
  out +=
      "Ranges are the observed colour changes (sources differ by 0.2-0.4 pH); the change is first seen at the edge "
      "the titration reaches first. pK(In) values spread between sources and are informative only.\n";
  out += std::string(safety_caution()) + "\n";
  return out;
}

std::string crosscheck_text(const indicators::CrosscheckResult& r) {
  std::string out;
  const auto& ind = r.indicator;
  out += fmt::format("Cross-check: {} (pH {}), manual {:.2f} mL", ind.name, range_text(ind), r.manual_volume_mL);
  if (r.manual_sample_volume_mL) out += fmt::format(" for a {:g} mL sample", *r.manual_sample_volume_mL);
  out += "\n";
  out += "  Run";
  if (r.run_sample_volume_mL) out += fmt::format(" (sample {:g} mL)", *r.run_sample_volume_mL);
  out += fmt::format(": colour change seen at {:.3f} mL", r.run_seen_mL);
  if (r.run_begin_mL && r.run_end_mL) {
    out += fmt::format("; the whole change {:.3f}-{:.3f} mL", *r.run_begin_mL, *r.run_end_mL);
  }
  out += "\n";
  if (r.change && r.endpoint_index) {
    const auto& c = *r.change;
    out += fmt::format("  Endpoint {} at {:.3f} mL: indicator error ", *r.endpoint_index, c.equivalence_mL);
    out += c.error_percent ? fmt::format("{:+.2f} %", *c.error_percent) : std::string("not known");
    out += fmt::format(", {}", verdict_words(c.verdict));
    if (c.span_drops) out += fmt::format("; the change spans {:.3f} mL ({:.1f} drops)", *c.span_mL, *c.span_drops);
    out += "\n";
  }
  // An uncertainty below the last decimal shown is said so, not printed as zero.
  out += fmt::format(
      "  Predicted for the manual sample: {:.2f} ± {} mL ({})",
      r.predicted_mL,
      r.prediction_uncertainty_mL < 0.005 ? std::string("< 0.01") : fmt::format("{:.2f}", r.prediction_uncertainty_mL),
      r.curve_method == "model" ? "on the fitted model" : "between the readings");
  if (r.scale != 1.0) out += fmt::format(" (run x {:.4g})", r.scale);
  out += "\n";
  const bool class_a = std::fabs(r.burette_tolerance_mL - indicators::kClassA50mLBuretteTolerance_mL) < 1e-12;
  out += fmt::format("  Difference {:+.2f} mL ({:+.2f} %); tolerance ±{:.2f} mL = {} ±{:.2f} mL + one drop {:.2f} mL\n",
                     r.difference_mL,
                     r.difference_percent,
                     r.tolerance_mL,
                     class_a ? "Class A 50 mL burette (ISO 385, ASTM E287)" : "burette",
                     r.burette_tolerance_mL,
                     r.drop_volume_mL);
  out += "  Result: the manual titration " + r.statement;
  if (!r.agrees) {
    out += r.likely_cause == indicators::LikelyCause::indicator ? "; likelier cause: the indicator"
                                                                : "; likelier cause: reading or titrant";
  }
  out += "\n";
  out += "  " + r.explanation + ".\n";
  for (const auto& n : r.notes) out += "  Note: " + n + ".\n";
  out += std::string(safety_caution()) + "\n";
  return out;
}

std::string to_json(const Analysis& analysis, const indicators::CrosscheckResult& r) {
  ordered_json j = ordered_json::parse(to_json(analysis));
  ordered_json c;
  c["indicator"] = r.indicator.name;
  c["range_pH"] = {number(r.indicator.low_pH, 2), number(r.indicator.high_pH, 2)};
  c["manual_volume_mL"] = number(r.manual_volume_mL, kVolumeDecimals);
  c["manual_sample_volume_mL"] = number(r.manual_sample_volume_mL, kVolumeDecimals);
  c["run_sample_volume_mL"] = number(r.run_sample_volume_mL, kVolumeDecimals);
  c["scale"] = number(r.scale, 8);
  c["run_seen_mL"] = number(r.run_seen_mL, kVolumeDecimals);
  c["run_change_mL"] = {number(r.run_begin_mL, kVolumeDecimals), number(r.run_end_mL, kVolumeDecimals)};
  c["predicted_mL"] = number(r.predicted_mL, kVolumeDecimals);
  c["prediction_uncertainty_mL"] = number(r.prediction_uncertainty_mL, kVolumeDecimals);
  c["curve"] = r.curve_method;
  c["difference_mL"] = number(r.difference_mL, kVolumeDecimals);
  c["difference_percent"] = number(r.difference_percent, kPercentDecimals);
  c["tolerance_mL"] = number(r.tolerance_mL, kVolumeDecimals);
  c["burette_tolerance_mL"] = number(r.burette_tolerance_mL, kVolumeDecimals);
  c["drop_volume_mL"] = number(r.drop_volume_mL, kVolumeDecimals);
  c["agrees"] = r.agrees;
  c["statement"] = r.statement;
  c["likely_cause"] = std::string(indicators::to_string(r.likely_cause));
  c["explanation"] = r.explanation;
  c["endpoint_index"] = r.endpoint_index ? ordered_json(*r.endpoint_index) : ordered_json(nullptr);
  c["predicted_equivalence_mL"] = number(r.predicted_equivalence_mL, kVolumeDecimals);
  c["indicator_error_percent"] = number(r.change ? r.change->error_percent : std::nullopt, kPercentDecimals);
  c["verdict"] = r.change ? ordered_json(std::string(indicators::to_string(r.change->verdict))) : ordered_json(nullptr);
  c["notes"] = r.notes;
  j["crosscheck"] = std::move(c);
  return j.dump(2, ' ', false, nlohmann::json::error_handler_t::replace) + "\n";
}

}  // namespace veq::report
