// SPDX-License-Identifier: MIT
// Locating an indicator's colour change on a titration curve; indicator error, span and verdict.
#include "veq/indicators/colour_change.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <boost/math/tools/toms748_solve.hpp>
#include <cmath>
#include <cstdint>
#include <memory>

namespace veq::indicators {
namespace {

// Bits of agreement asked of the root finder: far below any volume that
// matters (1e-12 mL at 25 mL) and reached in a handful of steps.
constexpr int kRootBits = 40;
constexpr std::uintmax_t kRootMaxIterations = 100;

const char* past_word(int direction) {
  return direction >= 0 ? "above" : "below";
}

}  // namespace

std::string_view to_string(SeenRule rule) {
  switch (rule) {
    case SeenRule::range_edge:
      return "range_edge";
    case SeenRule::pK_plus_minus_one:
      return "pK_plus_minus_one";
  }
  return "range_edge";
}

std::string_view to_string(Verdict verdict) {
  switch (verdict) {
    case Verdict::suitable:
      return "suitable";
    case Verdict::usable_with_correction:
      return "usable_with_correction";
    case Verdict::unsuitable:
      return "unsuitable";
  }
  return "unsuitable";
}

std::vector<std::string> IndicatorOptions::validate() const {
  std::vector<std::string> p;
  if (!(drop_volume_mL > 0.0 && drop_volume_mL <= 1.0)) {
    p.push_back(fmt::format("drop_volume_mL = {}: must be above 0 and at most 1 mL", drop_volume_mL));
  }
  if (!(max_error_percent > 0.0 && std::isfinite(max_error_percent))) {
    p.push_back(fmt::format("max_error_percent = {}: must be positive", max_error_percent));
  }
  if (!(max_correctable_error_percent >= max_error_percent && std::isfinite(max_correctable_error_percent))) {
    p.push_back(fmt::format("max_correctable_error_percent = {}: must be at least max_error_percent ({})",
                            max_correctable_error_percent,
                            max_error_percent));
  }
  return p;
}

double base_form_fraction(double pH, double pK_In) {
  return 1.0 / (1.0 + std::pow(10.0, pK_In - pH));
}

Transition transition(const Indicator& indicator, int direction, SeenRule rule) {
  const double lo = rule == SeenRule::range_edge ? indicator.low_pH : indicator.pK_In - 1.0;
  const double hi = rule == SeenRule::range_edge ? indicator.high_pH : indicator.pK_In + 1.0;
  Transition t;
  t.begin_pH = direction >= 0 ? lo : hi;
  t.end_pH = direction >= 0 ? hi : lo;
  // A one-colour indicator is seen at its colourless side's edge, where the
  // colour reaches the threshold of sight, whichever way the pH moves.
  if (indicator.colourless_acid_side() != indicator.colourless_base_side()) {
    const double threshold = indicator.colourless_acid_side() ? lo : hi;
    t.seen_at_end = threshold == t.end_pH;
  }
  t.seen_pH = t.seen_at_end ? t.end_pH : t.begin_pH;
  return t;
}

PhCurve interpolated_curve(const Curve& curve) {
  auto v = std::make_shared<std::vector<double>>();
  auto y = std::make_shared<std::vector<double>>();
  for (std::size_t i = 0; i < curve.volume_mL.size(); ++i) {
    if (i < curve.spike.size() && curve.spike[i] != 0) continue;
    v->push_back(curve.volume_mL[i]);
    y->push_back(curve.value[i]);
  }
  PhCurve c;
  c.knots_mL = *v;
  c.knots_pH = *y;
  c.direction = curve.direction >= 0 ? +1 : -1;
  c.method = "interpolated";
  c.exact = false;
  c.pH_at_mL = [v, y](double x) {
    if (v->empty()) return 7.0;  // unreachable: no knots means no crossing is ever searched
    if (x <= v->front()) return y->front();
    if (x >= v->back()) return y->back();
    const auto it = std::upper_bound(v->begin(), v->end(), x);
    const std::size_t j = static_cast<std::size_t>(it - v->begin());
    const double t = (x - (*v)[j - 1]) / ((*v)[j] - (*v)[j - 1]);
    return (*y)[j - 1] + t * ((*y)[j] - (*y)[j - 1]);
  };
  return c;
}

Crossing find_crossing(const PhCurve& curve, double target_pH) {
  Crossing out;
  const auto& k = curve.knots_mL;
  if (k.empty() || !curve.pH_at_mL) return out;
  const double dir = curve.direction >= 0 ? 1.0 : -1.0;
  const auto side = [&](double v) { return dir * (curve.pH_at_mL(v) - target_pH); };
  // Knots where the model gives no finite pH are skipped (a precondition
  // violation, not worth a NaN in a report). The signs come from the cached
  // knot pH values when there are any (no allocation: the indicator check
  // asks this for every indicator and endpoint), else from the curve, once each.
  std::vector<double> computed;
  const bool cached = curve.knots_pH.size() == k.size();
  if (!cached) {
    computed.reserve(k.size());
    for (double v : k) computed.push_back(side(v));
  }
  const auto sign_at = [&](std::size_t i) { return cached ? dir * (curve.knots_pH[i] - target_pH) : computed[i]; };
  // The last usable knot still on the near side of the target, and the next usable one after it.
  bool any = false;
  std::optional<std::size_t> last_near;
  for (std::size_t i = 0; i < k.size(); ++i) {
    const double si = sign_at(i);
    if (!std::isfinite(si)) continue;
    any = true;
    if (si < 0.0) last_near = i;
  }
  if (!any) return out;
  if (!last_near) {
    out.status = CrossingStatus::past_at_start;
    return out;
  }
  std::optional<std::size_t> next;
  for (std::size_t i = *last_near + 1; i < k.size() && !next; ++i) {
    if (std::isfinite(sign_at(i))) next = i;
  }
  if (!next) {
    out.status = CrossingStatus::not_reached;
    return out;
  }
  const double a = k[*last_near];
  const double b = k[*next];
  const double fa = sign_at(*last_near);
  const double fb = sign_at(*next);
  out.status = CrossingStatus::found;
  out.bracket_low_mL = a;
  out.bracket_high_mL = b;
  if (fb == 0.0) {
    out.volume_mL = b;
    return out;
  }
  // A model with a closed-form inverse: the volume at the target pH, when it falls in the bracket.
  if (curve.mL_at_pH) {
    const double v = curve.mL_at_pH(target_pH);
    if (std::isfinite(v) && v >= a && v <= b) {
      out.volume_mL = v;
      return out;
    }
  }
  // Bracketed root of the curve itself (for the interpolated curve this is
  // the straight line between the two readings; for a model, the model).
  try {
    std::uintmax_t iterations = kRootMaxIterations;
    const auto root = boost::math::tools::toms748_solve(
        side, a, b, fa, fb, boost::math::tools::eps_tolerance<double>(kRootBits), iterations);
    out.volume_mL = 0.5 * (root.first + root.second);
  } catch (const std::exception&) {
    out.volume_mL = a + (b - a) * (-fa) / (fb - fa);  // the chord, if the solver gives up
  }
  return out;
}

ColourChange judge(const Indicator& indicator,
                   const PhCurve& curve,
                   double equivalence_mL,
                   double equivalence_uncertainty_mL,
                   const IndicatorOptions& options) {
  ColourChange cc;
  cc.indicator = indicator;
  cc.equivalence_mL = equivalence_mL;
  const int dir = curve.direction >= 0 ? +1 : -1;
  const Transition t = transition(indicator, dir, options.seen_rule);
  cc.transition = t;
  const bool positive_eq = equivalence_mL > 0.0 && std::isfinite(equivalence_mL);
  cc.tolerance_percent =
      std::max(options.max_error_percent, positive_eq ? 100.0 * options.drop_volume_mL / equivalence_mL : 0.0);

  std::vector<std::string> notes;
  const Crossing begin = find_crossing(curve, t.begin_pH);
  const Crossing end = find_crossing(curve, t.end_pH);
  const Crossing& seen = t.seen_at_end ? end : begin;
  if (seen.volume_mL) {
    cc.seen_mL = seen.volume_mL;
    cc.seen_uncertainty_mL = curve.exact ? 0.0 : (seen.bracket_high_mL - seen.bracket_low_mL) / std::sqrt(12.0);
    if (positive_eq) {
      cc.error_percent = 100.0 * (*seen.volume_mL - equivalence_mL) / equivalence_mL;
      cc.error_uncertainty_percent =
          100.0 * std::hypot(*cc.seen_uncertainty_mL, equivalence_uncertainty_mL) / equivalence_mL;
      cc.correction_mL = equivalence_mL - *seen.volume_mL;
    } else {
      notes.push_back("the equivalence volume is not positive, so there is no indicator error");
    }
  } else if (!curve.knots_mL.empty()) {
    const double first = curve.pH_at_mL(curve.knots_mL.front());
    const double last = curve.pH_at_mL(curve.knots_mL.back());
    if (seen.status == CrossingStatus::past_at_start) {
      notes.push_back(
          fmt::format("the run starts at pH {:.2f}, already {} pH {:.1f}: the colour change was seen "
                      "before the first reading",
                      first,
                      past_word(dir),
                      t.seen_pH));
    } else {
      notes.push_back(
          fmt::format("the run never gets {} pH {:.1f} (it ends at pH {:.2f}): the colour change "
                      "is not seen",
                      past_word(dir),
                      t.seen_pH,
                      last));
    }
  } else {
    notes.push_back("the curve has no readings");
  }
  if (begin.volume_mL) cc.begin_mL = begin.volume_mL;
  if (end.volume_mL) cc.end_mL = end.volume_mL;
  if (cc.begin_mL && cc.end_mL) {
    cc.span_mL = std::max(0.0, *cc.end_mL - *cc.begin_mL);
    cc.span_drops = *cc.span_mL / options.drop_volume_mL;
  } else if (cc.seen_mL && end.status == CrossingStatus::not_reached) {
    notes.push_back(
        fmt::format("the change is not complete by the end of the run (pH {:.1f} not reached), so its "
                    "span is not known",
                    t.end_pH));
  } else if (cc.seen_mL && begin.status == CrossingStatus::past_at_start) {
    const double first = curve.knots_mL.empty() ? t.begin_pH : curve.pH_at_mL(curve.knots_mL.front());
    notes.push_back(
        fmt::format("the change begins at pH {:.1f}, before the first reading (pH {:.2f}), so its span "
                    "is not known",
                    t.begin_pH,
                    first));
  }

  if (cc.error_percent) {
    const double err = std::fabs(*cc.error_percent);
    const double tol_mL = cc.tolerance_percent / 100.0 * equivalence_mL;
    if (err <= cc.tolerance_percent) {
      cc.verdict = Verdict::suitable;
    } else if (err <= options.max_correctable_error_percent && cc.span_mL && *cc.span_mL / std::sqrt(12.0) <= tol_mL) {
      cc.verdict = Verdict::usable_with_correction;
      notes.push_back(fmt::format("add {:+.3f} mL to a titre read with it", *cc.correction_mL));
    } else {
      cc.verdict = Verdict::unsuitable;
      if (err <= options.max_correctable_error_percent && cc.span_mL) {
        notes.push_back(
            fmt::format("its colour change is too gradual for a fixed correction ({:.1f} drops)", *cc.span_drops));
      }
    }
    // Only when the uncertainty could turn the verdict (the interval straddles the tolerance).
    if (*cc.error_uncertainty_percent > cc.tolerance_percent &&
        err - *cc.error_uncertainty_percent < cc.tolerance_percent) {
      notes.push_back(
          fmt::format("the readings resolve the error only to ±{:.2f} %, more than the tolerance; finer "
                      "dosing near the endpoint would settle the verdict",
                      *cc.error_uncertainty_percent));
    }
  }
  for (const auto& n : notes) cc.note += (cc.note.empty() ? "" : "; ") + n;
  return cc;
}

IndicatorResult assess(const PhCurve& curve,
                       const signal::EndpointResult& endpoints,
                       const IndicatorOptions& options,
                       const IndicatorTable& table) {
  IndicatorResult result;
  result.curve_method = curve.method;
  for (const auto& e : endpoints.endpoints) {
    EndpointIndicators ei;
    ei.endpoint_index = e.index;
    ei.equivalence_mL = e.volume_mL;
    ei.endpoint_pH = e.value;
    for (const Indicator* row : table.bracketing(e.value)) {
      ei.candidates.push_back(judge(*row, curve, e.volume_mL, e.uncertainty_mL, options));
    }
    for (const auto& row : table.rows()) {
      if (row.brackets(e.value)) continue;
      if (judge(row, curve, e.volume_mL, e.uncertainty_mL, options).verdict == Verdict::suitable) {
        ei.also_suitable.push_back(row.name);
      }
    }
    if (ei.candidates.empty()) {
      result.warnings.push_back(
          {"no_indicator",
           fmt::format("endpoint {} at pH {:.2f}: no indicator in the table changes colour there", e.index, e.value),
           {}});
    }
    result.endpoints.push_back(std::move(ei));
  }
  return result;
}

IndicatorResult assess(const Curve& curve,
                       const signal::EndpointResult& endpoints,
                       const IndicatorOptions& options,
                       const IndicatorTable& table) {
  if (curve.signal != SignalKind::ph) {
    IndicatorResult result;
    for (const auto& e : endpoints.endpoints) {
      EndpointIndicators ei;
      ei.endpoint_index = e.index;
      ei.equivalence_mL = e.volume_mL;
      result.endpoints.push_back(std::move(ei));
    }
    if (!endpoints.endpoints.empty()) {
      result.warnings.push_back({"indicators_need_pH",
                                 "no indicator check: the run is in mV without an electrode calibration (give --e0 "
                                 "or --buffers to convert it to pH)",
                                 {}});
    }
    return result;
  }
  return assess(interpolated_curve(curve), endpoints, options, table);
}

}  // namespace veq::indicators
