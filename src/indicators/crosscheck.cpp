// SPDX-License-Identifier: MIT
// The manual cross-check: prediction from the run, scaling to the manual sample, tolerance and likely cause.
#include "veq/indicators/crosscheck.hpp"

#include <fmt/format.h>

#include <cmath>

namespace veq::indicators {

std::string_view to_string(LikelyCause cause) {
  switch (cause) {
    case LikelyCause::none:
      return "none";
    case LikelyCause::indicator:
      return "indicator";
    case LikelyCause::reading_or_titrant:
      return "reading_or_titrant";
  }
  return "none";
}

std::vector<std::string> CrosscheckOptions::validate() const {
  std::vector<std::string> p = indicator.validate();
  if (!(burette_tolerance_mL >= 0.0 && burette_tolerance_mL <= 5.0)) {
    p.push_back(fmt::format("burette_tolerance_mL = {}: must be between 0 and 5 mL", burette_tolerance_mL));
  }
  return p;
}

CrosscheckResult crosscheck(const Run& run,
                            const Curve& curve,
                            const signal::EndpointResult& endpoints,
                            const ManualTitration& manual,
                            const CrosscheckOptions& options,
                            const IndicatorTable& table,
                            const PhCurve* model) {
  if (const auto p = options.validate(); !p.empty()) throw InputError({"options", 0, 0}, p.front());
  if (!(std::isfinite(manual.volume_mL) && manual.volume_mL > 0.0)) {
    throw InputError({"--manual-volume", 0, 0},
                     fmt::format("manual volume {} mL is not a positive volume", manual.volume_mL),
                     "give the titrant volume read from the burette at the colour change, in mL");
  }
  if (manual.sample_volume_mL && !(std::isfinite(*manual.sample_volume_mL) && *manual.sample_volume_mL > 0.0)) {
    throw InputError({"--manual-sample-volume", 0, 0},
                     fmt::format("manual sample volume {} mL is not a positive volume", *manual.sample_volume_mL),
                     "give the volume of sample taken for the manual titration, in mL");
  }
  const Indicator& ind = table.find(manual.indicator);
  if (model == nullptr && curve.signal != SignalKind::ph) {
    throw InputError({run.source, 0, 0},
                     "the run is in mV without an electrode calibration, so no indicator's pH can be placed on it",
                     "give --e0 (and --slope) or --buffers to convert it to pH");
  }

  CrosscheckResult r;
  r.indicator = ind;
  r.manual_volume_mL = manual.volume_mL;
  r.manual_sample_volume_mL = manual.sample_volume_mL;
  r.run_sample_volume_mL = run.facts.sample_volume_mL;
  r.burette_tolerance_mL = options.burette_tolerance_mL;
  r.drop_volume_mL = options.indicator.drop_volume_mL;
  r.tolerance_mL = options.burette_tolerance_mL + options.indicator.drop_volume_mL;

  if (manual.sample_volume_mL) {
    if (!run.facts.sample_volume_mL || !(*run.facts.sample_volume_mL > 0.0)) {
      throw InputError({run.source, 0, 0},
                       fmt::format("the run's sample volume is not known, so the prediction cannot be scaled to the "
                                   "manual sample of {:g} mL",
                                   *manual.sample_volume_mL),
                       "give the run's sample volume with --sample-volume (mL), or a 'Sample volume' line in the "
                       "run's metadata");
    }
    r.scale = *manual.sample_volume_mL / *run.facts.sample_volume_mL;
  } else {
    r.notes.push_back(
        "no manual sample volume given: the manual titration is taken to be of the same sample size as "
        "the run");
  }

  const PhCurve pc = model != nullptr ? *model : interpolated_curve(curve);
  r.curve_method = model != nullptr ? "model" : "interpolated";
  const Transition t = transition(ind, pc.direction, options.indicator.seen_rule);
  const Crossing seen = find_crossing(pc, t.seen_pH);
  if (!seen.volume_mL) {
    std::string hint = "'veq indicators --ph <endpoint pH>' lists the indicators that change colour at an endpoint";
    std::string names;
    for (const auto& e : endpoints.endpoints) {
      for (const Indicator* row : table.bracketing(e.value)) names += (names.empty() ? "" : ", ") + row->name;
      if (!names.empty()) {
        hint = fmt::format("at this run's endpoint {} (pH {:.2f}) these change colour: {}", e.index, e.value, names);
        break;
      }
    }
    const char* how = seen.status == CrossingStatus::past_at_start ? "the run starts past" : "the run never reaches";
    throw InputError({run.source, 0, 0},
                     fmt::format("{}'s colour change is not seen in this run: {} pH {:.1f}", ind.name, how, t.seen_pH),
                     hint);
  }
  r.run_seen_mL = *seen.volume_mL;
  const Crossing begin = find_crossing(pc, t.begin_pH);
  const Crossing end = find_crossing(pc, t.end_pH);
  if (begin.volume_mL) r.run_begin_mL = begin.volume_mL;
  if (end.volume_mL) r.run_end_mL = end.volume_mL;

  // The endpoint whose equivalence volume lies nearest the colour change.
  const signal::Endpoint* nearest = nullptr;
  for (const auto& e : endpoints.endpoints) {
    if (nearest == nullptr || std::fabs(e.volume_mL - r.run_seen_mL) < std::fabs(nearest->volume_mL - r.run_seen_mL)) {
      nearest = &e;
    }
  }
  if (nearest != nullptr) {
    r.change = judge(ind, pc, nearest->volume_mL, nearest->uncertainty_mL, options.indicator);
    r.endpoint_index = nearest->index;
    r.predicted_equivalence_mL = nearest->volume_mL * r.scale;
    if (r.change->verdict == Verdict::unsuitable && r.change->error_percent) {
      r.notes.push_back(
          fmt::format("{} is unsuitable for endpoint {} (indicator error {:+.2f} %): even a perfect "
                      "manual titration with it misses the equivalence point",
                      ind.name,
                      nearest->index,
                      *r.change->error_percent));
    } else if (r.change->verdict == Verdict::usable_with_correction && r.change->correction_mL) {
      r.notes.push_back(
          fmt::format("{} needs a correction at endpoint {}: add {:+.3f} mL to a manual titre of this "
                      "sample size to reach the equivalence point",
                      ind.name,
                      nearest->index,
                      *r.change->correction_mL * r.scale));
    }
  } else {
    r.notes.push_back("the run has no endpoint, so the indicator error is not known");
  }

  r.predicted_mL = r.run_seen_mL * r.scale;
  // Where between its two bracketing readings the crossing lies is unknown (DEVELOPERS.md, Visual
  // indicators): rectangular, (b - a)/sqrt(12), scaled with the sample.
  r.prediction_uncertainty_mL = r.scale * (seen.bracket_high_mL - seen.bracket_low_mL) / std::sqrt(12.0);
  // On the fitted model the crossing itself is exact; the model's position carries the endpoint's uncertainty.
  if (model != nullptr) r.prediction_uncertainty_mL = nearest != nullptr ? r.scale * nearest->uncertainty_mL : 0.0;
  if (r.prediction_uncertainty_mL > 0.5 * r.tolerance_mL) {
    r.notes.push_back(
        fmt::format("the run's readings place the colour change only to ±{:.3f} mL at this sample "
                    "size, a large part of the tolerance; finer dosing near the endpoint would sharpen "
                    "the check",
                    r.prediction_uncertainty_mL));
  }
  r.difference_mL = r.manual_volume_mL - r.predicted_mL;
  r.difference_percent = 100.0 * r.difference_mL / r.predicted_mL;
  // The comparison allows for the last digit of a volume written in mL to 1e-9.
  r.agrees = std::fabs(r.difference_mL) <= r.tolerance_mL + 1e-9;

  const std::string where =
      fmt::format("{}'s colour change is seen at {:.2f} mL for this sample", ind.name, r.predicted_mL);
  if (r.agrees) {
    r.likely_cause = LikelyCause::none;
    r.statement = "agrees";
    r.explanation = fmt::format(
        "{}; the manual {:.2f} mL lies within ±{:.2f} mL of it (burette ±{:.2f} mL plus one "
        "drop of {:.2f} mL)",
        where,
        r.manual_volume_mL,
        r.tolerance_mL,
        r.burette_tolerance_mL,
        r.drop_volume_mL);
    return r;
  }
  r.statement =
      fmt::format("disagrees by {:.2f} mL ({:.2f} %)", std::fabs(r.difference_mL), std::fabs(r.difference_percent));
  const char* higher = r.difference_mL > 0 ? "higher" : "lower";
  const bool whole_change = r.run_begin_mL && r.run_end_mL;
  const double change_lo = (whole_change ? *r.run_begin_mL * r.scale : r.predicted_mL) - r.tolerance_mL;
  const double change_hi = (whole_change ? *r.run_end_mL * r.scale : r.predicted_mL) + r.tolerance_mL;
  const bool within_change = whole_change && r.manual_volume_mL >= change_lo && r.manual_volume_mL <= change_hi;
  const std::string change_text = whole_change ? fmt::format("the whole change runs from {:.2f} to {:.2f} mL",
                                                             *r.run_begin_mL * r.scale,
                                                             *r.run_end_mL * r.scale)
                                               : std::string("the whole change is not within the run");
  const bool at_equivalence =
      r.predicted_equivalence_mL && std::fabs(r.manual_volume_mL - *r.predicted_equivalence_mL) <= r.tolerance_mL;
  if (within_change) {
    r.likely_cause = LikelyCause::indicator;
    r.explanation = fmt::format(
        "{}; {}, and the manual result is {} but within it: the colour was probably judged at "
        "another stage of the change",
        where,
        change_text,
        higher);
  } else if (at_equivalence) {
    r.likely_cause = LikelyCause::indicator;
    r.explanation = fmt::format(
        "{}, but the manual result lies at the equivalence point ({:.2f} mL): the difference "
        "is this indicator's error, so the colour was read elsewhere than its table range "
        "predicts",
        where,
        *r.predicted_equivalence_mL);
  } else {
    r.likely_cause = LikelyCause::reading_or_titrant;
    r.explanation = fmt::format(
        "{}; {}, and the manual result is {} and outside it, which the indicator does not "
        "explain: check the burette reading, the sample volume and the titrant concentration",
        where,
        change_text,
        higher);
  }
  return r;
}

}  // namespace veq::indicators
