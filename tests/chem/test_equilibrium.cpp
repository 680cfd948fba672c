// SPDX-License-Identifier: MIT
// pH from the charge balance against textbook values, physical identities and an independent solver.
#include <catch2/catch.hpp>
#include <cmath>

#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"
#include "veq/chem/simulate.hpp"

using veq::test::close;
namespace chem = veq::chem;

namespace {

chem::Titration<double> titration(const chem::Sample& s,
                                  const chem::Titrant& t,
                                  chem::ActivityModel activity,
                                  double temperature_C = 25.0) {
  chem::ModelOptions o;
  o.activity = activity;
  o.temperature_C = temperature_C;
  return chem::Titration<double>(chem::build_model(s, t, o));
}

chem::Sample sample(double V0, std::vector<chem::Analyte> analytes) {
  chem::Sample s;
  s.volume_mL = V0;
  s.analytes = std::move(analytes);
  return s;
}

chem::Analyte weak_acid(double c, std::vector<double> pKa) {
  chem::Analyte a;
  a.name = "weak acid";
  a.conc_mol_L = c;
  a.pKa_25C = std::move(pKa);
  return a;
}

chem::Analyte strong(chem::AnalyteKind k, double c) {
  chem::Analyte a;
  a.name = "strong";
  a.kind = k;
  a.conc_mol_L = c;
  return a;
}

}  // namespace

TEST_CASE("0.1 mol/L acetic acid has pH 2.88", "[chem][equilibrium]") {
  const auto s = sample(25.0, {chem::analyte("acetic acid", 0.1)});
  // Textbook value for 0.1 M acetic acid, pKa 4.76: pH 2.88 (e.g. Harris, Quantitative Chemical Analysis,
  // weak acid chapter; from memory). Two decimals given.
  CHECK(titration(s, {}, chem::ActivityModel::ideal).pH(0.0) == close(2.88, 0.0, 0.005));
  // Exact ideal answer of the quadratic h^2 + Ka h - Ka C = 0 (Kw negligible), pKa 4.756 (CRC-org).
  const double Ka = std::pow(10.0, -4.756);
  const double h = (-Ka + std::sqrt(Ka * Ka + 4 * Ka * 0.1)) / 2;
  CHECK(titration(s, {}, chem::ActivityModel::ideal).pH(0.0) == close(-std::log10(h), 0.0, 1e-6));
  // With activity the reading barely moves at I ~ 1e-3.
  CHECK(titration(s, {}, chem::ActivityModel::davies).pH(0.0) == close(2.88, 0.0, 0.005));
}

TEST_CASE("at half-neutralisation pH = pKa (Henderson-Hasselbalch), ideal solution", "[chem][equilibrium]") {
  for (const char* name : {"acetic acid", "formic acid", "benzoic acid", "lactic acid"}) {
    INFO(name);
    const chem::AnalyteInfo* info = chem::find_analyte(name);
    REQUIRE(info != nullptr);
    const auto s = sample(20.0, {chem::analyte(name, 0.1)});
    const auto t = titration(s, {}, chem::ActivityModel::ideal);
    // Henderson–Hasselbalch (textbook) neglects [H+] beside C/2: |pH - pKa| ~ [H+]/(C ln10) < 0.005 here.
    CHECK(t.pH(10.0) == close(info->pKa_25C[0], 0.0, 0.005));
  }
  // Acetic acid, the textbook case: within 0.001 (the neglected [H+]/C term is 4e-4).
  const auto s = sample(25.0, {chem::analyte("acetic acid", 0.1)});
  CHECK(titration(s, {}, chem::ActivityModel::ideal).pH(12.5) == close(4.756, 0.0, 0.001));
}

TEST_CASE("equivalence pH of 0.1 M acetic acid with 0.1 M NaOH is 8.72", "[chem][equilibrium]") {
  const auto s = sample(50.0, {chem::analyte("acetic acid", 0.1)});
  const auto t = titration(s, {}, chem::ActivityModel::ideal);
  const auto eq = chem::equivalence_points(s, {}, {}, t);
  REQUIRE(eq.size() == 1);
  // Stoichiometry: 50 mL x 0.1 / 0.1 = 50 mL.
  CHECK(eq[0].volume_mL == close(50.0, 1e-14));
  // Textbook worked value 8.72 (e.g. Skoog, Fundamentals of Analytical Chemistry, acetic acid titration
  // example; from memory), two decimals.
  CHECK(eq[0].pH == close(8.72, 0.0, 0.01));
  // Hydrolysis approximation pH = (pKw + pKa + log c)/2 with c = 0.05 M acetate (textbook formula).
  CHECK(eq[0].pH == close(0.5 * (t.model().pKw + 4.756 + std::log10(0.05)), 0.0, 0.001));
}

TEST_CASE("ideal solver agrees with the independent test-side charge balance", "[chem][equilibrium]") {
  struct Case {
    const char* what;
    veq::test::Sample ref;
    chem::Sample sample;
    chem::Titrant titrant;
    double to_mL;
  };
  const double pKw = chem::pKw(25.0);
  chem::Titrant acid;
  acid.kind = veq::TitrantKind::acid;
  acid.conc_mol_L = 0.1;
  chem::Titrant base;
  base.conc_mol_L = 0.1;
  std::vector<Case> cases;
  cases.push_back(
      {"HCl", {20.0, 0.1, 0.0, {}, 0.1, pKw}, sample(20.0, {strong(chem::AnalyteKind::strong_acid, 0.1)}), base, 40});
  cases.push_back({"phosphoric",
                   {25.0, 0.0, 0.0, {{0.05, {2.15, 7.20, 12.34}}}, 0.1, pKw},
                   sample(25.0, {weak_acid(0.05, {2.15, 7.20, 12.34})}),
                   base,
                   45});
  cases.push_back({"HCl + acetic",
                   {25.0, 0.01, 0.0, {{0.02, {4.756}}}, 0.05, pKw},
                   sample(25.0, {strong(chem::AnalyteKind::strong_acid, 0.01), weak_acid(0.02, {4.756})}),
                   chem::Titrant{veq::TitrantKind::base, 0.05, 0.0, ""},
                   40});
  cases.push_back({"citric",
                   {10.0, 0.0, 0.0, {{0.03, {3.13, 4.76, 6.40}}}, 0.1, pKw},
                   sample(10.0, {weak_acid(0.03, {3.13, 4.76, 6.40})}),
                   base,
                   15});
  cases.push_back({"NaOH with HCl",
                   {20.0, 0.0, 0.1, {}, -0.1, pKw},
                   sample(20.0, {strong(chem::AnalyteKind::strong_base, 0.1)}),
                   acid,
                   40});
  cases.push_back({"tetraprotic",
                   {25.0, 0.0, 0.0, {{0.01, {2.0, 2.7, 6.16, 10.26}}}, 0.1, pKw},
                   sample(25.0, {weak_acid(0.01, {2.0, 2.7, 6.16, 10.26})}),
                   base,
                   15});
  for (const Case& c : cases) {
    INFO(c.what);
    const auto t = titration(c.sample, c.titrant, chem::ActivityModel::ideal);
    chem::Equilibrium warm;
    for (double v = 0.0; v <= c.to_mL; v += c.to_mL / 97.0) {
      INFO("V = " << v);
      const double ours = t.solve(v, &warm).pH;
      const double theirs = veq::test::pH_at_volume(c.ref, v);
      CHECK(ours == close(theirs, 0.0, 1e-9));
      CHECK(t.volume_at_pH(ours) == close(veq::test::volume_at_pH(c.ref, ours), 1e-9, 1e-12));
    }
  }
}

TEST_CASE("phosphoric acid: three equivalence volumes 1:2:3 at the textbook pH", "[chem][equilibrium]") {
  const auto s = sample(25.0, {chem::analyte("phosphoric acid", 0.05)});
  const auto t = titration(s, {}, chem::ActivityModel::ideal);
  const auto eq = chem::equivalence_points(s, {}, {}, t);
  REQUIRE(eq.size() == 3);
  // Stoichiometry: 25 mL x 0.05 mol/L per proton / 0.1 mol/L = 12.5 mL per step.
  CHECK(eq[0].volume_mL == close(12.5, 1e-14));
  CHECK(eq[1].volume_mL == close(2 * eq[0].volume_mL, 1e-14));
  CHECK(eq[2].volume_mL == close(3 * eq[0].volume_mL, 1e-14));
  // First and second equivalence near (pKa1 + pKa2)/2 = 4.68 and (pKa2 + pKa3)/2 = 9.77 (amphiprotic
  // approximation, textbook), within the concentration-dependent corrections (±0.2); methyl orange /
  // bromocresol green and phenolphthalein / thymolphthalein mark them (textbook).
  CHECK(eq[0].pH > 4.4);
  CHECK(eq[0].pH < 4.9);
  CHECK(eq[1].pH > 9.4);
  CHECK(eq[1].pH < 10.0);
  // The third lies above pH 11.5, where water's own buffering hides it (textbook: not titratable in water).
  CHECK(eq[2].pH > 11.5);
  // The pH rises through each: below before, above after (monotonic curve).
  for (const auto& e : eq) {
    CHECK(t.pH(e.volume_mL - 0.5) < e.pH);
    CHECK(t.pH(e.volume_mL + 0.5) > e.pH);
  }
}

TEST_CASE("bases titrated with acid: ammonia, TRIS, sodium carbonate", "[chem][equilibrium]") {
  chem::Titrant hcl;
  hcl.kind = veq::TitrantKind::acid;
  hcl.conc_mol_L = 0.1;
  {
    const auto s = sample(25.0, {chem::analyte("ammonia", 0.1)});
    const auto t = titration(s, hcl, chem::ActivityModel::ideal);
    // Half-neutralised ammonia buffers at pKa(NH4+) = 9.25 (CRC-inorg; Henderson–Hasselbalch).
    CHECK(t.pH(12.5) == close(9.25, 0.0, 0.002));
    const auto eq = chem::equivalence_points(s, hcl, {}, t);
    REQUIRE(eq.size() == 1);
    CHECK(eq[0].volume_mL == close(25.0, 1e-14));
    // 0.05 M NH4+ at equivalence: pH = (pKa - log c)/2 = 5.28 (weak acid approximation, textbook).
    CHECK(eq[0].pH == close(0.5 * (9.25 - std::log10(0.05)), 0.0, 0.002));
  }
  {
    // TRIS: pKa 8.07 at 25 °C, -0.028 per K (Wikipedia, "Tris"): the buffer point moves with temperature.
    const auto s = sample(25.0, {chem::analyte("TRIS", 0.1)});
    CHECK(titration(s, hcl, chem::ActivityModel::ideal).pH(12.5) == close(8.07, 0.0, 0.002));
    CHECK(titration(s, hcl, chem::ActivityModel::ideal, 37.0).pH(12.5) == close(8.07 - 0.028 * 12, 0.0, 0.002));
  }
  {
    // Na2CO3 with HCl: two equivalence points, V and 2V (carbonate -> bicarbonate -> CO2), the first
    // near (pKa1 + pKa2)/2 = 8.34 (phenolphthalein, SM 2320 B P alkalinity at 8.3), the second acidic
    // (bromocresol green–methyl red at 4.5 for total alkalinity, SM 2320 B).
    const auto s = sample(50.0, {chem::analyte("sodium carbonate", 0.05)});
    const auto t = titration(s, hcl, chem::ActivityModel::ideal);
    const auto eq = chem::equivalence_points(s, hcl, {}, t);
    REQUIRE(eq.size() == 2);
    CHECK(eq[0].volume_mL == close(25.0, 1e-14));
    CHECK(eq[1].volume_mL == close(50.0, 1e-14));
    CHECK(eq[0].pH == close(8.34, 0.0, 0.1));
    CHECK(eq[1].pH > 3.8);
    CHECK(eq[1].pH < 4.6);
  }
}

TEST_CASE("KHP standardisation: one equivalence, phthalate buffer at pKa2", "[chem][equilibrium]") {
  // Worked example (REFERENCES §8, derived): 0.5366 g KHP (204.2212 g/mol, BAM certificate) reach
  // equivalence at 13.1606 mL of NaOH, c = m z / (M V_eq) = 0.1997 mol/L. Here in 50 mL of water.
  const double c_titrant = 0.5366 / (204.2212 * 0.0131606);
  CHECK(c_titrant == close(0.1997, 0.0, 0.00005));
  const auto s = sample(50.0, {chem::analyte("KHP", 0.5366 / 204.2212 / 0.050)});
  chem::Titrant naoh;
  naoh.conc_mol_L = c_titrant;
  const auto t = titration(s, naoh, chem::ActivityModel::ideal);
  const auto eq = chem::equivalence_points(s, naoh, {}, t);
  REQUIRE(eq.size() == 1);  // KHP has one proton left to give (potassium hydrogen phthalate)
  CHECK(eq[0].volume_mL == close(13.1606, 1e-12));
  // Half-way the HP-/P2- buffer sits at pKa2 = 5.41 (Fromm), within 0.01 (Henderson–Hasselbalch).
  CHECK(t.pH(eq[0].volume_mL / 2) == close(5.41, 0.0, 0.01));
}

TEST_CASE("carbonate in the base titrant delays an endpoint above pH 6.35 only", "[chem][equilibrium]") {
  // Carbonate error (textbook): with a fraction f of NaOH carbonated, endpoints where carbonate ends as
  // HCO3- (above pH ~6.35, e.g. acetic acid at 8.7) need 1/(1 - f/2) times the volume; at an
  // acidic endpoint (carbonate back to CO2) the titrant still counts in full.
  const auto s = sample(25.0, {chem::analyte("acetic acid", 0.1)});
  chem::Titrant clean;
  chem::Titrant carbonated;
  carbonated.carbonate_fraction = 0.04;
  const auto t0 = titration(s, clean, chem::ActivityModel::ideal);
  const auto t1 = titration(s, carbonated, chem::ActivityModel::ideal);
  const double pH_eq = t0.pH(25.0);
  // Volume where the carbonated titrant reaches the clean equivalence pH. Each carbonate takes up
  // 2 - j protons (j protons lost on average at that pH), each hydroxide one: the titrant counts as
  // Ct [(1 - f) + f (2 - j) / 2], which is Ct (1 - f/2) when all carbonate ends as HCO3-.
  const double v1 = t1.volume_at_pH(pH_eq);
  const auto carbonate = chem::fractions_at_pH(t1.model().titrant_carbonate, pH_eq);
  const double j = carbonate[1] + 2 * carbonate[2];
  const double f = 0.04;
  CHECK(j == close(1.0, 0.0, 0.05));  // mostly bicarbonate at pH 8.7 (pKa 6.35 / 10.33)
  // The rest of the vessel (acetate hydrolysis, water) is the same at the same pH: 1e-4 mL covers it.
  CHECK(v1 == close(25.0 / ((1 - f) + f * (2 - j) / 2), 0.0, 1e-4));
  CHECK(v1 > 25.0 / (1 - 0.02) - 0.05);
  // HCl with it at an acidic endpoint: the two titrants agree to within 0.1 % of the volume at pH 4.
  const auto hcl = sample(25.0, {strong(chem::AnalyteKind::strong_acid, 0.1)});
  const auto h0 = titration(hcl, clean, chem::ActivityModel::ideal);
  const auto h1 = titration(hcl, carbonated, chem::ActivityModel::ideal);
  CHECK(h1.volume_at_pH(4.0) == close(h0.volume_at_pH(4.0), 0.001));
}

TEST_CASE("volume from pH and pH from volume agree to 1e-10", "[chem][equilibrium]") {
  const auto s = sample(25.0,
                        {chem::analyte("phosphoric acid", 0.03),
                         chem::analyte("acetic acid", 0.02),
                         strong(chem::AnalyteKind::strong_acid, 0.005)});
  chem::Titrant base;
  base.carbonate_fraction = 0.01;
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    chem::Sample with_salt = s;
    with_salt.background_ionic_strength_mol_L = activity == chem::ActivityModel::davies ? 0.05 : 0.0;
    const auto t = titration(with_salt, base, activity);
    chem::Equilibrium warm;
    for (double v = 0.0; v <= 40.0; v += 0.173) {
      const auto p = t.solve(v, &warm);
      REQUIRE(p.state.converged);
      INFO("V = " << v << ", activity " << chem::to_string(activity));
      CHECK(t.volume_at_pH(p.pH) == close(v, 0.0, 1e-10 * std::max(1.0, v)));
    }
  }
}

TEST_CASE("Davies: converged ionic strength is the speciation's, and pKa shifts as expected", "[chem][equilibrium]") {
  // Acetic acid half-neutralised in background electrolyte: Henderson–Hasselbalch with activities
  // (textbook), pH = pKa + log([A-]/[HA]) + log gamma(A-) - log gamma(HA) = pKa + L at [A-] = [HA].
  auto s = sample(25.0, {chem::analyte("acetic acid", 0.01)});
  s.background_ionic_strength_mol_L = 0.1;
  chem::Titrant base;
  base.conc_mol_L = 0.01;
  const auto t = titration(s, base, chem::ActivityModel::davies);
  const auto p = t.solve(12.5);
  REQUIRE(p.state.converged);
  // I from the solved composition, recomputed by the plain charge balance.
  const auto b = chem::charge_balance(t.model(), 12.5, p.log10_h, p.log10_gamma1);
  CHECK(p.state.ionic_strength_mol_L == close(b.ionic_strength, 1e-12));
  CHECK(p.log10_gamma1 == close(chem::davies_log10_gamma(1, b.ionic_strength, t.model().davies_A), 0.0, 1e-13));
  // Exactly, with [A-] = [Na+] + [H+] (charge balance; [OH-] ~ 1e-9 is negligible here):
  const double c = 0.01 * 25.0 / 37.5, na = 0.01 * 12.5 / 37.5, h = std::pow(10.0, p.log10_h);
  CHECK(p.pH == close(4.756 + p.log10_gamma1 + std::log10((na + h) / (c - na - h)), 0.0, 1e-6));
  // Composition: background 0.1 diluted by 25/37.5, plus Na+ and acetate at 0.01 x 12.5/37.5 each
  // (I = 1/2 sum c z^2; [H+] ~ 2e-5 is the only other ion).
  CHECK(b.ionic_strength == close(0.1 * 25.0 / 37.5 + 0.01 * 12.5 / 37.5, 1e-3));
}

TEST_CASE("warm starts give the same answers as cold starts", "[chem][equilibrium]") {
  const auto s = sample(25.0, {chem::analyte("citric acid", 0.02), chem::analyte("ammonium chloride", 0.01)});
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    const auto t = titration(s, {}, activity);
    chem::Equilibrium warm;
    for (double v = 0.0; v <= 30.0; v += 0.37) {
      const double hot = t.solve(v, &warm).pH;
      const double cold = t.solve(v).pH;
      CHECK(hot == close(cold, 0.0, 1e-12));
    }
    // A warm start from far away (the end of the run) still converges to the same root.
    chem::Equilibrium far;
    (void)t.solve(30.0, &far);
    CHECK(t.solve(0.0, &far).pH == close(t.solve(0.0).pH, 0.0, 1e-12));
  }
}

TEST_CASE("speciation: fractions sum to 1 and cross at each pKa", "[chem][speciation]") {
  chem::Protolyte<double> p;
  p.steps = 3;
  p.pKa = {2.15, 7.20, 12.34, 0.0};  // phosphoric acid (REFERENCES §2)
  for (double pH = 0.0; pH <= 14.0; pH += 0.5) {
    const auto f = chem::fractions_at_pH(p, pH);
    double sum = 0.0;
    for (double x : f) sum += x;
    CHECK(sum == close(1.0, 1e-14));
  }
  // At pH = pKa_j the two forms of step j are equal (definition of Ka).
  for (int j = 0; j < 3; ++j) {
    const auto f = chem::fractions_at_pH(p, p.pKa[static_cast<std::size_t>(j)]);
    CHECK(f[static_cast<std::size_t>(j)] == close(f[static_cast<std::size_t>(j) + 1], 1e-12));
  }
  // With activity: H2PO4- and HPO4 2- are equal where pH = pKa2 + log gamma(HPO4 2-) - log gamma(H2PO4-)
  // = pKa2 + 4L - L (mass action with activities; Davies log gamma_z = z^2 L).
  const double L = -0.1;
  const auto f = chem::fractions_at_pH(p, 7.20 + 3 * L, L);
  CHECK(f[1] == close(f[2], 1e-12));
  CHECK(chem::form_label(0, 3, 0) == "H3A");
  CHECK(chem::form_label(0, 3, 1) == "H2A-");
  CHECK(chem::form_label(0, 3, 3) == "A3-");
  CHECK(chem::form_label(1, 1, 0) == "HA+");
}

TEST_CASE("closed-form curve by pH lies on the solved curve", "[chem][equilibrium]") {
  const auto s = sample(25.0, {chem::analyte("phosphoric acid", 0.05)});
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    const auto t = titration(s, {}, activity);
    const auto curve = chem::curve_by_pH(t, 1.0, 13.0, 400, 45.0);
    REQUIRE(curve.size() > 300);
    for (std::size_t i = 0; i < curve.size(); ++i) {
      CHECK(curve[i].volume_mL >= 0.0);
      CHECK(curve[i].volume_mL <= 45.0);
      if (i > 0) CHECK(curve[i].volume_mL >= curve[i - 1].volume_mL);  // pH rises with base added
      CHECK(t.pH(curve[i].volume_mL) == close(curve[i].pH, 0.0, 1e-10));
    }
  }
}

TEST_CASE("equal, independent sites titrate as one step: pKa spaced by the statistical factor", "[chem][equilibrium]") {
  // n equal, independent sites of one constant k have the macroscopic constants K_j = k (n - j + 1) / j
  // (the statistical factor of polyprotic acids; e.g. Adams, J. Am. Chem. Soc. 38 (1916) 1503, from memory):
  // two sites at pk -/+ log10 2, three at pk - log10 3, pk, pk + log10 3. In an ideal solution the protons
  // they bind are those of one step of constant k at n times the concentration, so the curves coincide.
  const double pk = 4.75, l2 = std::log10(2.0), l3 = std::log10(3.0);
  const auto one = titration(sample(25.0, {weak_acid(0.1, {pk})}), {}, chem::ActivityModel::ideal);
  const auto two = titration(sample(25.0, {weak_acid(0.05, {pk - l2, pk + l2})}), {}, chem::ActivityModel::ideal);
  const auto three =
      titration(sample(25.0, {weak_acid(0.1 / 3.0, {pk - l3, pk, pk + l3})}), {}, chem::ActivityModel::ideal);
  for (double v = 0.0; v <= 35.0; v += 0.5) {
    CAPTURE(v);
    CHECK(two.pH(v) == close(one.pH(v), 0.0, 1e-7));
    CHECK(three.pH(v) == close(one.pH(v), 0.0, 1e-7));
  }
  // With activity (Davies) the charges of the forms differ (A2- against A-), and so do the curves: the
  // difference the fit's merged-steps rule keeps from deciding a model (DEVELOPERS.md, "Model selection").
  const auto one_d = titration(sample(25.0, {weak_acid(0.1, {pk})}), {}, chem::ActivityModel::davies);
  const auto two_d = titration(sample(25.0, {weak_acid(0.05, {pk - l2, pk + l2})}), {}, chem::ActivityModel::davies);
  CHECK(std::fabs(two_d.pH(15.0) - one_d.pH(15.0)) > 0.01);
}
