// SPDX-License-Identifier: MIT
// Colour change, indicator error and verdict, against titration curves computed from the exact charge balance.
#include <algorithm>
#include <catch2/catch.hpp>
#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include "indicators/curves.hpp"
#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "veq/analyze.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"
#include "veq/indicators/colour_change.hpp"
#include "veq/indicators/table.hpp"
#include "veq/report/json.hpp"

using veq::indicators::IndicatorTable;
using veq::indicators::judge;
using veq::indicators::Verdict;
using veq::test::Sample;

namespace {

const veq::indicators::Indicator& row(const char* name) {
  return IndicatorTable::builtin().find(name);
}

// pKw at 25 °C used by tests/support/charge_balance.hpp: CRC Handbook, "Ionization constant of normal
// water" (Bandura & Lvov 2006). At the equivalence point of a strong acid with a strong base
// [H+] = [OH-], so pH = pKw / 2.
constexpr double kPKw = 13.995;

// The dosing step of the readings that contains volume v [mL].
double step_at(const std::vector<double>& volumes, double v) {
  for (std::size_t i = 1; i < volumes.size(); ++i) {
    if (v <= volumes[i]) return volumes[i] - volumes[i - 1];
  }
  return volumes.back() - volumes[volumes.size() - 2];
}

// How far the error veq interpolates between exact readings can lie from the model's: both crossings lie
// between the same two readings (the model is monotonic and the readings are exact), so the seen volumes
// differ by less than that step h; the detected equivalence volume ve_det differs from the true ve by
// |ve - ve_det|. Then |err_veq - err_model| <= 100 (h + (vs/ve) |ve - ve_det|) / ve_det.
double interpolation_bound_percent(const std::vector<double>& volumes, double vs, double ve, double ve_det) {
  return 100.0 * (step_at(volumes, vs) + vs / ve * std::fabs(ve - ve_det)) / ve_det * (1.0 + 1e-9);
}

bool within(const veq::indicators::Indicator& r, double lo, double hi) {
  return r.low_pH >= lo && r.high_pH <= hi;
}

}  // namespace

TEST_CASE("the ideal visible transition spans pK(In) +- 1, where one form is ten times the other",
          "[indicators][science]") {
  // Henderson-Hasselbalch, pH = pK(In) + log([In-]/[HIn]); one form dominates the eye at >= 10:1, so the
  // change spans pK(In) +- 1 (textbook; REFERENCES §1, confidence H; common practice).
  const double pK = GENERATE(1.65, 4.7, 7.1, 9.4);
  CHECK(veq::indicators::base_form_fraction(pK + 1.0, pK) == veq::test::close(10.0 / 11.0, 1e-12));
  CHECK(veq::indicators::base_form_fraction(pK - 1.0, pK) == veq::test::close(1.0 / 11.0, 1e-12));
  CHECK(veq::indicators::base_form_fraction(pK, pK) == veq::test::close(0.5, 1e-12));

  // The pK(In) +- 1 rule places the change there, in the titration's direction.
  veq::indicators::Indicator ind = row("Bromothymol blue");
  ind.pK_In = pK;
  const auto up = veq::indicators::transition(ind, +1, veq::indicators::SeenRule::pK_plus_minus_one);
  CHECK(up.begin_pH == veq::test::close(pK - 1.0, 1e-12));
  CHECK(up.end_pH == veq::test::close(pK + 1.0, 1e-12));
  CHECK(up.seen_pH == up.begin_pH);
  const auto down = veq::indicators::transition(ind, -1, veq::indicators::SeenRule::pK_plus_minus_one);
  CHECK(down.begin_pH == veq::test::close(pK + 1.0, 1e-12));
  CHECK(down.seen_pH == down.begin_pH);
}

TEST_CASE("every table range is about pK(In) +- 1 wide and centred near pK(In)", "[indicators][table][science]") {
  // Observed ranges are 1-2 pH units wide (the eye needs a 10:1 to 100:1 change in the ratio of the two
  // forms; common practice, no source), and lie around pK(In) within the spread of published pK(In)
  // values and range edges (REFERENCES §1: edges vary 0.2-0.4, pK(In) 0.2-0.7 between sources).
  for (const auto& r : IndicatorTable::builtin().rows()) {
    INFO(r.name);
    CHECK(r.high_pH - r.low_pH >= 1.0);
    CHECK(r.high_pH - r.low_pH <= 2.2);
    CHECK(std::fabs(r.midpoint_pH() - r.pK_In) <= 0.6);
  }
}

TEST_CASE("with the pK(In) +- 1 rule the colour change spans the model's volumes at pK(In) - 1 and + 1",
          "[indicators][science]") {
  // Acetic acid with NaOH on the exact model: the span is V(pK + 1) - V(pK - 1) computed by the charge
  // balance alone.
  const Sample s = veq::test::acetic_acid_with_base(25.0);
  const auto curve = veq::test::model_curve(s, 30.0);
  veq::indicators::IndicatorOptions o;
  o.seen_rule = veq::indicators::SeenRule::pK_plus_minus_one;
  const auto& ind = row("Thymol blue (alkaline range)");
  const auto c = judge(ind, curve, 25.0, 0.0, o);
  REQUIRE(c.span_mL.has_value());
  const double expected = veq::test::volume_at_pH(s, ind.pK_In + 1.0) - veq::test::volume_at_pH(s, ind.pK_In - 1.0);
  CHECK(*c.span_mL == veq::test::close(expected, 1e-9, 1e-9));
  CHECK(*c.seen_mL == veq::test::close(veq::test::volume_at_pH(s, ind.pK_In - 1.0), 1e-9));
}

TEST_CASE("a one-colour indicator is seen where its colour appears or vanishes", "[indicators][science]") {
  // Phenolphthalein: the first pink when the pH rises, the last trace of pink gone when it falls, both
  // at the colourless edge of its range (8.2). Standard Methods 2320 B titrates phenolphthalein
  // alkalinity "to the disappearance of the pink colour" (from memory); REFERENCES §9: P alkalinity to
  // pH 8.3.
  const auto& pp = row("Phenolphthalein");
  const auto up = veq::indicators::transition(pp, +1, veq::indicators::SeenRule::range_edge);
  CHECK(up.seen_pH == 8.2);
  CHECK_FALSE(up.seen_at_end);
  const auto down = veq::indicators::transition(pp, -1, veq::indicators::SeenRule::range_edge);
  CHECK(down.seen_pH == 8.2);
  CHECK(down.begin_pH == 10.0);
  CHECK(down.seen_at_end);
  // A two-colour indicator is seen at the first change from the colour it starts in (common practice,
  // no source): methyl orange going from yellow to red first shows at the top of its range.
  const auto mo = veq::indicators::transition(row("Methyl orange"), -1, veq::indicators::SeenRule::range_edge);
  CHECK(mo.seen_pH == 4.4);
}

TEST_CASE("strong acid / strong base 0.1 mol/L: every indicator changing between pH 4 and 10 is suitable",
          "[indicators][reference]") {
  // Textbook: for 0.1 mol/L strong acid and strong base the jump runs from about pH 4 to 10, so any
  // indicator that changes colour inside it will do (REFERENCES §1, "Choice", confidence H; Harris,
  // Quantitative Chemical Analysis, from memory). On the exact model the error is computed from the charge
  // balance alone and must have the sign of (seen pH - equivalence pH) in the titration's direction:
  // a change seen above the equivalence pH of a rising curve comes after the equivalence point.
  const bool acid_sample = GENERATE(true, false);
  const Sample s = acid_sample ? veq::test::strong_acid_with_base(20.0) : veq::test::strong_base_with_acid(20.0);
  const int direction = acid_sample ? +1 : -1;
  const auto curve = veq::test::model_curve(s, 30.0);
  const double eq_pH = kPKw / 2.0;
  int checked = 0;
  for (const auto& r : IndicatorTable::builtin().rows()) {
    if (!within(r, 4.0, 10.0)) continue;
    ++checked;
    INFO(r.name << (acid_sample ? ", HCl with NaOH" : ", NaOH with HCl"));
    const auto c = judge(r, curve, 20.0, 0.0);
    REQUIRE(c.error_percent.has_value());
    const double expected = veq::test::model_error_percent(s, c.transition.seen_pH, 20.0);
    CHECK(*c.error_percent == veq::test::close(expected, 1e-6, 1e-9));
    CHECK(c.verdict == Verdict::suitable);
    // Small: within the larger of 0.1 % and one 0.05 mL drop (0.25 % of 20 mL).
    CHECK(std::fabs(*c.error_percent) <= 0.25);
    const double sign = direction * (c.transition.seen_pH - eq_pH);
    CHECK(*c.error_percent * sign > 0.0);
  }
  CHECK(checked >= 8);
}

TEST_CASE("strong acid / strong base through analyze(): bromothymol blue first, errors as the model's",
          "[indicators][analyze]") {
  // Readings of the exact model every 0.5 mL, every 0.01 mL from 19 to 21 mL (dynamic dosing).
  const Sample s = veq::test::strong_acid_with_base(20.0);
  const auto volumes = veq::test::dosing(30.0, 0.5, 19.0, 21.0, 0.01);
  const veq::Analysis a = veq::analyze(veq::test::model_run(s, volumes));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  REQUIRE(a.indicators.endpoints.size() == 1);
  const auto& ei = a.indicators.endpoints[0];
  const double ve_det = a.endpoints.endpoints[0].volume_mL;
  REQUIRE(ei.candidates.size() >= 1);
  // Equivalence near pH 7: bromothymol blue (REFERENCES §1, "Choice": "≈7 bromothymol blue", H).
  CHECK(ei.candidates[0].indicator.name == "Bromothymol blue");
  CHECK(ei.candidates[0].verdict == Verdict::suitable);
  CHECK(a.indicators.curve_method == "interpolated");
  // Every indicator changing between pH 4 and 10, judged on the readings: suitable, and within the
  // interpolation bound of the model's error.
  const auto curve = veq::indicators::interpolated_curve(a.curve);
  for (const auto& r : IndicatorTable::builtin().rows()) {
    if (!within(r, 4.0, 10.0)) continue;
    INFO(r.name);
    const auto c = judge(r, curve, ve_det, a.endpoints.endpoints[0].uncertainty_mL);
    REQUIRE(c.error_percent.has_value());
    const double vs = veq::test::volume_at_pH(s, c.transition.seen_pH);
    const double expected = veq::test::model_error_percent(s, c.transition.seen_pH, 20.0);
    CHECK(std::fabs(*c.error_percent - expected) <= interpolation_bound_percent(volumes, vs, 20.0, ve_det));
    CHECK(c.verdict == Verdict::suitable);
    const bool listed = std::any_of(
        ei.candidates.begin(), ei.candidates.end(), [&](const auto& k) { return k.indicator.name == r.name; });
    const bool also = std::find(ei.also_suitable.begin(), ei.also_suitable.end(), r.name) != ei.also_suitable.end();
    CHECK(listed != also);  // each is either a candidate or listed as also suitable
  }
}

TEST_CASE("acetic acid with NaOH: phenolphthalein suitable, methyl orange errs by a large negative amount",
          "[indicators][reference]") {
  // Acetic acid pKa 4.756 (CRC Handbook; REFERENCES §2), 0.1 mol/L, 25 mL, with 0.1 mol/L NaOH:
  // Veq = 25.000 mL (stoichiometry), equivalence pH = (pKw + pKa + log 0.05) / 2 = 8.72 (hydrolysis
  // of acetate; REFERENCES §1 "Choice": weak acid with strong base -> phenolphthalein).
  const Sample s = veq::test::acetic_acid_with_base(25.0);
  CHECK(veq::test::pH_at_volume(s, 25.0) == Approx(0.5 * (kPKw + 4.756 + std::log10(0.05))).margin(0.01));

  SECTION("on the exact model") {
    const auto curve = veq::test::model_curve(s, 30.0);
    const auto pp = judge(row("Phenolphthalein"), curve, 25.0, 0.0);
    CHECK(pp.verdict == Verdict::suitable);
    CHECK(*pp.error_percent == veq::test::close(veq::test::model_error_percent(s, 8.2, 25.0), 1e-6, 1e-9));
    CHECK(*pp.error_percent < 0.0);  // 8.2 lies below the equivalence pH on a rising curve
    const auto mo = judge(row("Methyl orange"), curve, 25.0, 0.0);
    REQUIRE(mo.error_percent.has_value());
    // The model alone: the volume at which the solution reaches pH 3.1, its first colour change.
    const double expected = veq::test::model_error_percent(s, 3.1, 25.0);
    CHECK(expected < -90.0);
    CHECK(*mo.error_percent == veq::test::close(expected, 1e-9));
    CHECK(mo.verdict == Verdict::unsuitable);
  }

  SECTION("through analyze() on readings") {
    // Readings every 0.1 mL, every 0.02 mL from 24 to 26 mL.
    const auto volumes = veq::test::dosing(30.0, 0.1, 24.0, 26.0, 0.02);
    const veq::Analysis a = veq::analyze(veq::test::model_run(s, volumes));
    REQUIRE(a.endpoints.endpoints.size() == 1);
    const double ve_det = a.endpoints.endpoints[0].volume_mL;
    const auto& ei = a.indicators.endpoints.at(0);
    std::vector<std::string> names;
    for (const auto& c : ei.candidates) names.push_back(c.indicator.name);
    const auto pp = std::find(names.begin(), names.end(), "Phenolphthalein");
    REQUIRE(pp != names.end());
    CHECK(ei.candidates[static_cast<std::size_t>(pp - names.begin())].verdict == Verdict::suitable);
    CHECK(std::find(names.begin(), names.end(), "Methyl orange") == names.end());
    const auto mo = judge(row("Methyl orange"), veq::indicators::interpolated_curve(a.curve), ve_det, 0.0);
    const double vs = veq::test::volume_at_pH(s, 3.1);
    CHECK(std::fabs(*mo.error_percent - veq::test::model_error_percent(s, 3.1, 25.0)) <=
          interpolation_bound_percent(volumes, vs, 25.0, ve_det));
    CHECK(*mo.error_percent < -90.0);
    CHECK(mo.verdict == Verdict::unsuitable);
  }
}

TEST_CASE("ammonia with HCl picks an acid-side indicator (methyl red / bromocresol green region)",
          "[indicators][reference]") {
  // NH4+ pKa 9.25 (CRC Handbook; REFERENCES §2), 0.1 mol/L NH3, 25 mL, with 0.1 mol/L HCl: Veq 25.000 mL,
  // equivalence pH = (pKa - log 0.05) / 2 = 5.28 (hydrolysis of NH4+); REFERENCES §1 "Choice": weak base
  // with strong acid -> methyl orange, methyl red, bromocresol green.
  const Sample s = veq::test::ammonia_with_acid(25.0);
  const auto volumes = veq::test::dosing(35.0, 0.1, 24.0, 26.0, 0.02);
  const veq::Analysis a = veq::analyze(veq::test::model_run(s, volumes));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const auto& e = a.endpoints.endpoints[0];
  CHECK(e.volume_mL == Approx(25.0).margin(0.02));
  CHECK(e.value == Approx(0.5 * (9.25 - std::log10(0.05))).margin(0.1));
  const auto& ei = a.indicators.endpoints.at(0);
  REQUIRE_FALSE(ei.candidates.empty());
  const auto& best = ei.candidates[0];
  CHECK(best.indicator.high_pH < 7.0);  // an acid-side indicator
  CHECK((best.indicator.name == "Methyl red" || best.indicator.name == "Bromocresol green"));
  CHECK(best.verdict == Verdict::suitable);
  for (const auto& c : ei.candidates) CHECK(c.indicator.name != "Phenolphthalein");
  // Phenolphthalein would lose its pink at pH 8.2, long before the equivalence point: the model says
  // how far (about a twelfth of the ammonia is still unneutralised there).
  const auto pp = judge(row("Phenolphthalein"), veq::test::model_curve(s, 35.0), 25.0, 0.0);
  CHECK(*pp.error_percent == veq::test::close(veq::test::model_error_percent(s, 8.2, 25.0), 1e-6));
  CHECK(*pp.error_percent < -5.0);
  CHECK(pp.verdict == Verdict::unsuitable);
}

TEST_CASE("a colour change beyond the tolerance but sharp is usable with a correction", "[indicators]") {
  // Rule (DEVELOPERS.md, Visual indicators): |error| above the tolerance, at most 2 %, and the whole
  // change spans no more than sqrt(12) tolerance volumes. Ammonia with HCl and bromocresol purple
  // (5.2-6.8): seen at pH 6.8, where the model leaves 10^(6.8 - 9.25) = 0.35 % of the ammonia, beyond
  // the 0.2 % tolerance (one drop of 25 mL), while the change to pH 5.2 takes under 0.1 mL.
  const Sample s = veq::test::ammonia_with_acid(25.0);
  const auto c = judge(row("Bromocresol purple"), veq::test::model_curve(s, 35.0), 25.0, 0.0);
  CHECK(*c.error_percent == veq::test::close(veq::test::model_error_percent(s, 6.8, 25.0), 1e-6));
  CHECK(c.tolerance_percent == veq::test::close(0.2, 1e-12));
  CHECK(c.verdict == Verdict::usable_with_correction);
  CHECK(*c.correction_mL == veq::test::close(25.0 - veq::test::volume_at_pH(s, 6.8), 1e-9));
  CHECK(c.note.find("add +0.0") != std::string::npos);
}

TEST_CASE("a curve that never reaches the indicator's pH gives no number and a note, never NaN", "[indicators]") {
  const Sample s = veq::test::acetic_acid_with_base(25.0);
  SECTION("not reached") {
    const auto curve = veq::test::model_curve(s, 20.0);  // stops in the buffer region, pH about 5.4
    const auto c = judge(row("Phenolphthalein"), curve, 25.0, 0.0);
    CHECK_FALSE(c.seen_mL.has_value());
    CHECK_FALSE(c.error_percent.has_value());
    CHECK_FALSE(c.span_mL.has_value());
    CHECK(c.verdict == Verdict::unsuitable);
    CHECK(c.note.find("never gets above pH 8.2") != std::string::npos);
  }
  SECTION("already past at the start") {
    veq::indicators::PhCurve curve = veq::test::model_curve(s, 30.0);
    curve.knots_mL.erase(curve.knots_mL.begin(), curve.knots_mL.begin() + 8);  // starts at 2 mL, pH about 3.7
    const auto c = judge(row("Methyl orange"), curve, 25.0, 0.0);
    CHECK_FALSE(c.error_percent.has_value());
    CHECK(c.note.find("already above pH 3.1") != std::string::npos);
  }
  SECTION("in the JSON report") {
    // The run stops at 25.04 mL (pH about 9.9): phenolphthalein's change to pH 10.0 is not complete.
    std::vector<double> volumes = veq::test::dosing(25.04, 0.1, 24.0, 26.0, 0.01);
    const veq::Analysis a = veq::analyze(veq::test::model_run(s, volumes));
    const std::string json = veq::report::to_json(a);
    CHECK(json.find("NaN") == std::string::npos);
    CHECK(json.find("nan") == std::string::npos);
    CHECK(json.find("inf") == std::string::npos);
    REQUIRE(a.indicators.endpoints.size() == 1);
    bool found = false;
    for (const auto& c : a.indicators.endpoints[0].candidates) {
      if (c.indicator.name != "Phenolphthalein") continue;
      found = true;
      CHECK(c.seen_mL.has_value());
      CHECK_FALSE(c.span_mL.has_value());
      CHECK(c.note.find("not complete by the end of the run") != std::string::npos);
    }
    CHECK(found);
    CHECK(json.find("\"span_mL\": null") != std::string::npos);
  }
}

TEST_CASE("the colour change is located where the curve passes the pH and stays past it", "[indicators]") {
  // Documented rule (DEVELOPERS.md, Visual indicators): the last crossing from the near side, between the
  // readings that bracket it. Readings 3, 5, 4, 6, 7 pH at 0..4 mL cross pH 4.5 three times; the colour
  // that stays is the one after 2 mL: 2 + (4.5 - 4)/(6 - 4) = 2.25 mL.
  veq::Curve c;
  c.volume_mL = {0, 1, 2, 3, 4};
  c.value = {3, 5, 4, 6, 7};
  c.spike = {0, 0, 0, 0, 0};
  c.direction = +1;
  const auto x = veq::indicators::find_crossing(veq::indicators::interpolated_curve(c), 4.5);
  REQUIRE(x.status == veq::indicators::CrossingStatus::found);
  CHECK(*x.volume_mL == veq::test::close(2.25, 1e-9));
  CHECK(x.bracket_low_mL == 2.0);
  CHECK(x.bracket_high_mL == 3.0);
  // A reading flagged as a spike is left out: without the dip the crossing is between 0 and 1 mL.
  c.spike = {0, 0, 1, 0, 0};
  CHECK(*veq::indicators::find_crossing(veq::indicators::interpolated_curve(c), 4.5).volume_mL ==
        veq::test::close(0.75, 1e-9));
  CHECK(veq::indicators::find_crossing(veq::indicators::interpolated_curve(c), 2.0).status ==
        veq::indicators::CrossingStatus::past_at_start);
  CHECK(veq::indicators::find_crossing(veq::indicators::interpolated_curve(c), 8.0).status ==
        veq::indicators::CrossingStatus::not_reached);
}

TEST_CASE("a run in mV without calibration gets no indicator check, and says so", "[indicators]") {
  veq::Run r = veq::test::model_run(veq::test::strong_acid_with_base(20.0), veq::test::dosing(30, 0.5, 19, 21, 0.05));
  r.signal = veq::SignalKind::mv;
  for (auto& y : r.signal_values) y = 400.0 - 59.16 * y;  // Nernst slope at 25 °C (REFERENCES §5)
  const veq::Analysis a = veq::analyze(r);
  REQUIRE(a.endpoints.endpoints.size() == 1);
  REQUIRE(a.indicators.endpoints.size() == 1);
  CHECK(a.indicators.endpoints[0].candidates.empty());
  CHECK_FALSE(a.indicators.endpoints[0].endpoint_pH.has_value());
  CHECK(
      std::any_of(a.warnings.begin(), a.warnings.end(), [](const auto& w) { return w.code == "indicators_need_pH"; }));
}

TEST_CASE("default options are pinned: indicators", "[options][indicators]") {
  const veq::indicators::IndicatorOptions o;
  // One drop about 0.05 mL (20 per mL): REFERENCES §10, textbook, confidence M.
  CHECK(o.drop_volume_mL == 0.05);
  CHECK(o.max_error_percent == 0.1);
  CHECK(o.max_correctable_error_percent == 2.0);
  CHECK(o.seen_rule == veq::indicators::SeenRule::range_edge);
  CHECK(o.validate().empty());
  veq::indicators::IndicatorOptions bad;
  bad.drop_volume_mL = 0.0;
  bad.max_correctable_error_percent = 0.05;
  const auto p = bad.validate();
  REQUIRE(p.size() == 2);
  CHECK(p[0].find("drop_volume_mL = 0") == 0);
  CHECK(p[1].find("max_correctable_error_percent = 0.05") == 0);
  veq::AnalyzeOptions ao;
  ao.indicators = bad;
  CHECK_THROWS_AS(veq::analyze(veq::test::model_run(veq::test::strong_acid_with_base(20.0), {0, 1, 2}), ao),
                  veq::InputError);
}

TEST_CASE("a model's closed-form inverse gives the crossing the root search finds", "[indicators]") {
  // Acetic acid 0.1 mol/L (pKa 4.756, CRC Handbook, "Dissociation constants of organic acids in aqueous
  // solution"), 25 mL with 0.1 mol/L NaOH, Davies: V(pH) closed form against a bracketed root of pH(V).
  veq::chem::Sample sample;
  sample.volume_mL = 25.0;
  sample.analytes.push_back(veq::chem::analyte("acetic acid", 0.1));
  const auto titration =
      std::make_shared<const veq::chem::Titration<double>>(veq::chem::build_model(sample, veq::chem::Titrant{}));
  veq::indicators::PhCurve c;
  for (int i = 0; i <= 60; ++i) {
    c.knots_mL.push_back(0.5 * i);
    c.knots_pH.push_back(titration->pH(0.5 * i));
  }
  c.pH_at_mL = [titration](double v) { return titration->pH(v); };
  c.direction = +1;
  c.exact = true;
  veq::indicators::PhCurve closed = c;
  closed.mL_at_pH = [titration](double pH) { return titration->volume_at_pH(pH); };
  for (double target : {3.5, 4.756, 8.2, 9.3, 10.0, 11.0}) {
    CAPTURE(target);
    const auto a = veq::indicators::find_crossing(c, target);
    const auto b = veq::indicators::find_crossing(closed, target);
    REQUIRE(a.status == veq::indicators::CrossingStatus::found);
    REQUIRE(b.status == veq::indicators::CrossingStatus::found);
    REQUIRE(a.volume_mL);
    REQUIRE(b.volume_mL);
    CHECK(std::fabs(*a.volume_mL - *b.volume_mL) <= 1e-7 * *b.volume_mL);
  }
  // Henderson-Hasselbalch (textbook): half way to the equivalence point the pH is near the pKa (Davies
  // lowers it by about 0.1 at this ionic strength), so pH 4.756 is crossed a little after 12.5 mL.
  const auto half = veq::indicators::find_crossing(closed, 4.756);
  REQUIRE(half.volume_mL);
  CHECK(*half.volume_mL > 12.5);
  CHECK(*half.volume_mL < 16.0);
}
