// SPDX-License-Identifier: MIT
// Gran's method against exact curves, a published worked example, and the consensus rule.
#include <catch2/catch.hpp>
#include <cmath>
#include <random>

#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "support/runs.hpp"
#include "veq/analyze.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"
#include "veq/signal/gran.hpp"

using veq::test::grid;
using veq::test::Sample;

namespace {

// Gran needs V0 (and the activity correction Ct): the runs state both.
veq::Run with_volumes(const Sample& s, const std::vector<double>& v, double noise = 0.0, unsigned seed = 1) {
  return veq::test::synthetic_run(s, v, noise, seed, veq::test::Facts::volumes);
}

veq::AnalyzeOptions ideal() {
  veq::AnalyzeOptions o;
  o.gran.activity_correction = false;  // the test curves are ideal (no activity)
  return o;
}

}  // namespace

TEST_CASE("Gran is exact for strong acid / strong base on exact curves", "[signal][gran]") {
  // 0.1 mol/L HCl in V0 with 0.1 mol/L NaOH: Veq = V0 by stoichiometry.
  const double V0 = GENERATE(20.0, 20.0043, 24.37);
  Sample s;
  s.V0_mL = V0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 1.5 * V0, 0.1)), ideal());
  REQUIRE(a.gran.size() == 1);
  REQUIRE(a.gran[0].before.has_value());
  CHECK(a.gran[0].before->function == veq::signal::GranFunction::excess_analyte);
  CHECK(a.gran[0].before->volume_mL == veq::test::close(V0, 1e-4));
  REQUIRE(a.gran[0].after.has_value());
  CHECK(a.gran[0].after->volume_mL == veq::test::close(V0, 1e-4));
  // The consensus follows the most precise method.
  CHECK(a.endpoints.endpoints[0].volume_mL == veq::test::close(V0, 1e-4));
}

TEST_CASE("Gran with pH noise sigma = 0.005: within 0.2 %", "[signal][gran]") {
  const unsigned seed = GENERATE(3u, 4u, 5u, 6u, 7u);
  Sample s;
  s.V0_mL = 25.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 37.5, 0.25), 0.005, seed), ideal());
  REQUIRE(a.gran[0].before.has_value());
  CHECK(a.gran[0].before->volume_mL == veq::test::close(25.0, 2e-3));
  CHECK(a.gran[0].before->uncertainty_mL > 0.0);
}

TEST_CASE("weak acid: Gran volume and pKa from the buffer slope", "[signal][gran][reference]") {
  // Acetic acid pKa 4.756 (CRC Handbook, dissociation constants of organic acids):
  // 0.1 mol/L in 25 mL with 0.1 mol/L NaOH, Veq 25.00 mL (stoichiometry).
  Sample s;
  s.V0_mL = 25.0;
  s.weak = {{0.1, {4.756}}};
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 35.0, 0.1)), ideal());
  REQUIRE(a.gran[0].before.has_value());
  const auto& b = *a.gran[0].before;
  CHECK(b.function == veq::signal::GranFunction::buffer);
  CHECK(b.volume_mL == veq::test::close(25.0, 1e-4));
  REQUIRE(b.pKa.has_value());
  CHECK(*b.pKa == veq::test::close(4.756, 0.0, 0.02));
  CHECK_FALSE(b.pKa_activity_corrected);
}

TEST_CASE("weak base with strong acid: buffer branch, pKa of the conjugate acid", "[signal][gran][reference]") {
  // Ammonia, pKa(NH4+) 9.25 (CRC Handbook, inorganic acids and bases), as the weak acid NH4+
  // fully deprotonated at the start (strong base counter-ion = total), titrated with 0.1 mol/L HCl.
  Sample s;
  s.V0_mL = 20.0;
  s.weak = {{0.1, {9.25}}};
  s.strong_base = 0.1;
  s.titrant = -0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 30.0, 0.1)), ideal());
  REQUIRE(a.gran.size() == 1);
  REQUIRE(a.gran[0].before.has_value());
  const auto& b = *a.gran[0].before;
  CHECK(b.function == veq::signal::GranFunction::buffer);
  CHECK(b.volume_mL == veq::test::close(20.0, 1e-4));
  REQUIRE(b.pKa.has_value());
  CHECK(*b.pKa == veq::test::close(9.25, 0.0, 0.02));
}

TEST_CASE("polyprotic: the second endpoint's buffer branch gives pKa2", "[signal][gran][reference]") {
  // Phosphoric acid pKa 2.15 / 7.20 / 12.34 (REFERENCES: Fromm; CRC-inorg), 0.05 mol/L in 25 mL,
  // 0.1 mol/L NaOH: endpoints at 12.5 and 25.0 mL (stoichiometry).
  Sample s;
  s.V0_mL = 25.0;
  s.weak = {{0.05, {2.15, 7.20, 12.34}}};
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 28.0, 0.05)), ideal());
  REQUIRE(a.gran.size() == 2);
  REQUIRE(a.gran[1].before.has_value());
  CHECK(a.gran[1].before->volume_mL == veq::test::close(25.0, 1e-3));
  REQUIRE(a.gran[1].before->pKa.has_value());
  CHECK(*a.gran[1].before->pKa == veq::test::close(7.20, 0.0, 0.02));
}

TEST_CASE("a run cut off just past the endpoint: derivative at the edge, Gran within 0.3 %", "[signal][gran]") {
  Sample s;
  s.V0_mL = 20.02;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  const veq::Analysis a = veq::analyze(with_volumes(s, grid(0.0, 20.1, 0.05), 0.005, 9), ideal());
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const auto& e = a.endpoints.endpoints[0];
  CHECK(std::find(e.flags.begin(), e.flags.end(), std::string("edge")) != e.flags.end());
  REQUIRE(a.gran[0].before.has_value());
  CHECK(a.gran[0].before->volume_mL == veq::test::close(20.02, 3e-3));
  // The edge-flagged derivative estimate does not enter the consensus.
  CHECK(e.consensus_methods == std::vector<std::string>{"gran_before"});
}

TEST_CASE("published worked example of a Gran plot", "[signal][gran][reference]") {
  // 20.0 mL HCl titrated with 0.10 mol/L NaOH (exercise data, REFERENCES §6 Example A; origin of the
  // data unknown, results derived there): (20 + V) 10^-pH over the first four readings gives
  // Veq = 20.01 mL; accept 20.0 ± 0.1 mL.
  veq::Run r;
  r.source = "example_a";
  r.facts.sample_volume_mL = 20.0;
  r.facts.titrant_conc_mol_L = 0.10;
  r.volume_mL = {10.0, 18.0, 19.0, 19.9, 20.0, 20.1, 21.0, 22.0};
  r.signal_values = {1.48, 2.28, 2.59, 3.60, 7.00, 10.60, 11.50, 11.68};
  r.line = {1, 2, 3, 4, 5, 6, 7, 8};
  veq::AnalyzeOptions o = ideal();
  o.gran.window_mL = std::make_pair(10.0, 19.9);
  const veq::Analysis a = veq::analyze(r, o);
  REQUIRE(a.gran.size() == 1);
  REQUIRE(a.gran[0].before.has_value());
  CHECK(a.gran[0].before->points == 4);
  CHECK(a.gran[0].before->volume_mL == veq::test::close(20.01, 0.0, 0.01));
  // Derivative maximum between 19.95 and 20.05 mL (same source): endpoint 20.0 ± 0.1 mL.
  CHECK(a.endpoints.endpoints[0].derivative_volume_mL == veq::test::close(20.0, 0.0, 0.1));
}

TEST_CASE("missing sample volume: Gran is skipped with a warning, never guessed", "[signal][gran]") {
  Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  veq::Run r = with_volumes(s, grid(0.0, 30.0, 0.1));
  r.facts.sample_volume_mL.reset();
  const veq::Analysis a = veq::analyze(r);
  REQUIRE(a.gran.size() == 1);
  CHECK_FALSE(a.gran[0].before.has_value());
  CHECK_FALSE(a.gran[0].after.has_value());
  bool warned = false;
  for (const auto& w : a.warnings) warned = warned || w.code == "gran_skipped";
  CHECK(warned);
  CHECK(a.endpoints.endpoints[0].consensus_methods == std::vector<std::string>{"derivative"});
}

TEST_CASE("consensus: inverse-variance mean, disagreement flagged", "[signal][gran]") {
  veq::signal::Endpoint e;
  e.derivative_volume_mL = 10.00;
  e.derivative_uncertainty_mL = 0.02;
  veq::signal::GranEndpoint g;
  g.before = veq::signal::GranBranch{};
  g.before->volume_mL = 10.01;
  g.before->uncertainty_mL = 0.01;
  g.before->linear = true;
  const auto c = veq::signal::consensus(e, g);
  // (10.00/0.02^2 + 10.01/0.01^2) / (1/0.02^2 + 1/0.01^2) = 10.008
  CHECK(c.volume_mL == veq::test::close(10.008, 1e-9));
  CHECK(c.uncertainty_mL == veq::test::close(1.0 / std::sqrt(1.0 / 0.0004 + 1.0 / 0.0001), 1e-9));
  CHECK_FALSE(c.disagree);
  // A Gran line 0.10 mL from a clean derivative estimate (beyond 2 x 0.022 combined) is left out, and with
  // no fit to say which chemistry holds the endpoint is flagged (look at the plots).
  g.before->volume_mL = 10.10;
  const auto out = veq::signal::consensus(e, g);
  CHECK(out.volume_mL == veq::test::close(10.00, 1e-12));
  CHECK(out.left_out == std::vector<std::string>{"gran_before"});
  CHECK(out.disagree);
  // Beside a usable fit that agrees with the derivative, the same Gran line is left out without a flag.
  const auto with_fit = veq::signal::consensus(e, g, veq::signal::VolumeEstimate{10.002, 0.005});
  CHECK(with_fit.left_out == std::vector<std::string>{"gran_before"});
  CHECK_FALSE(with_fit.disagree);
  // Estimates that each agree with the reference but scatter 2.5 times their uncertainties
  // among themselves (Birge ratio sqrt(12.5 / 2) = 2.5 > 2) flag the endpoint.
  veq::signal::Endpoint e2;
  e2.derivative_volume_mL = 10.00;
  e2.derivative_uncertainty_mL = 0.01;
  veq::signal::GranEndpoint g2;
  g2.before = veq::signal::GranBranch{};
  g2.before->volume_mL = 10.025;
  g2.before->uncertainty_mL = 0.01;
  g2.before->linear = true;
  g2.after = g2.before;
  g2.after->volume_mL = 9.975;
  CHECK(veq::signal::consensus(e2, g2).disagree);
  // A fitted estimate joins the same mean: (10.00/0.02^2 + 10.01/0.01^2 + 10.004/0.005^2) / (sum of weights).
  g.before->volume_mL = 10.01;
  const auto f = veq::signal::consensus(e, g, veq::signal::VolumeEstimate{10.004, 0.005});
  const double w1 = 1 / 0.0004, w2 = 1 / 0.0001, w3 = 1 / 0.000025;
  CHECK(f.volume_mL == veq::test::close((10.00 * w1 + 10.01 * w2 + 10.004 * w3) / (w1 + w2 + w3), 1e-9));
  CHECK(f.methods == std::vector<std::string>{"derivative", "gran_before", "fit"});
}

TEST_CASE("Gran default options are pinned", "[options]") {
  const veq::signal::GranOptions g;
  CHECK_FALSE(g.window_mL.has_value());
  CHECK(g.before_from == 0.10);
  CHECK(g.before_to == 0.97);
  CHECK(g.buffer_to == 0.90);
  CHECK(g.after_from == 0.03);
  CHECK(g.after_to == 1.0);
  CHECK(g.min_points == 4);
  CHECK(g.max_offset == 0.10);
  CHECK(g.activity_correction);
  CHECK_FALSE(g.analyte_charge.has_value());
  CHECK(g.background_ionic_strength_mol_L == 0.0);
  CHECK(g.validate().empty());
}

TEST_CASE("Gran on a non-ideal (Davies) curve: corrected for activity when the charge is stated",
          "[signal][gran][reference]") {
  // Acetic acid, thermodynamic pKa 4.756 (CRC Handbook, organic acids), 0.1 mol/L in 25 mL with
  // 0.1 mol/L NaOH, simulated by the chemistry model with Davies activity coefficients.
  veq::chem::SimulationOptions so;
  so.sample.volume_mL = 25.0;
  so.sample.analytes = {veq::chem::analyte("acetic acid", 0.1)};
  so.titrant.conc_mol_L = 0.1;
  so.dosing.step_mL = 0.1;
  so.dosing.final_volume_mL = 35.0;
  const veq::chem::Simulation sim = veq::chem::simulate(so);
  veq::Run r;
  r.source = "davies";
  r.facts.sample_volume_mL = 25.0;
  r.facts.titrant_conc_mol_L = 0.1;
  for (std::size_t i = 0; i < sim.readings.size(); ++i) {
    r.volume_mL.push_back(sim.readings[i].volume_mL);
    r.signal_values.push_back(sim.readings[i].signal);
    r.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  veq::AnalyzeOptions o;
  o.gran.analyte_charge = 0;  // HA, a neutral acid
  const veq::Analysis a = veq::analyze(r, o);
  REQUIRE(a.gran[0].before.has_value());
  const auto& b = *a.gran[0].before;
  CHECK(b.pKa_activity_corrected);
  REQUIRE(b.pKa.has_value());
  CHECK(*b.pKa == veq::test::close(4.756, 0.0, 0.02));
  // Stoichiometry: Veq = 0.1 x 25 / 0.1 = 25.00 mL.
  CHECK(b.volume_mL == veq::test::close(25.0, 1e-3));
  // Without the charge: the mixed constant, lower by about A (sqrt(I)/(1+sqrt(I)) - 0.3 I) at the
  // window's ionic strength (Davies; A = 0.509 at 25 °C, REFERENCES §4): 0.05-0.1 for I of 0.02-0.04.
  const veq::Analysis m = veq::analyze(r);
  REQUIRE(m.gran[0].before.has_value());
  CHECK_FALSE(m.gran[0].before->pKa_activity_corrected);
  const double shift = *b.pKa - *m.gran[0].before->pKa;
  CHECK(shift > 0.03);
  CHECK(shift < 0.12);
}
