// SPDX-License-Identifier: MIT
// The fit of a primary-standard run: potassium hydrogen phthalate of known mass gives pKa2 and the titrant factor.
#include <catch2/catch.hpp>

#include "fit/fit_support.hpp"
#include "support/approx.hpp"
#include "veq/analyze.hpp"
#include "veq/method/method.hpp"

namespace {

// KHP: M = 204.2212 g/mol (BAM certificate; REFERENCES §8). 0.4085 g in 50 mL, titrated with NaOH whose
// true concentration is 1.0123 x the nominal 0.1 mol/L (the factor is the simulation's input).
constexpr double kKhpMolarMass = 204.2212;
constexpr double kMass_g = 0.4085;
constexpr double kTiter = 1.0123;
// Phthalic acid pKa2 5.409 (Fromm, "Ionization constants of aqueous polyprotic acids"), 5.41 in the
// analyte table and REFERENCES §2; pKa1 2.95 (Fromm 2.946).
constexpr double kPhthalic2 = 5.41;
constexpr double kPhthalic1 = 2.95;

veq::chem::Simulation khp_run() {
  veq::chem::SimulationOptions so;
  so.sample.volume_mL = 50.0;
  so.sample.analytes = {veq::chem::analyte("KHP", 1000.0 * kMass_g / kKhpMolarMass / 1000.0 / 0.050)};
  so.titrant.conc_mol_L = 0.1 * kTiter;
  so.dosing.step_mL = 0.15;
  return veq::chem::simulate(so);
}

}  // namespace

TEST_CASE("a simulated KHP standardisation recovers pKa2 5.41 and the titrant factor", "[fit]") {
  const veq::chem::Simulation sim = khp_run();
  veq::AnalyzeOptions ao;
  ao.fit.model = "KHP";
  ao.fit.fit_titer = true;
  ao.fit.standard_amount_mmol = 1000.0 * kMass_g / kKhpMolarMass;
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(sim, true, 0.1), ao);
  REQUIRE(a.fit.best);
  const auto& f = *a.fit.best;
  CAPTURE(f.termination);
  CHECK(f.model == "potassium hydrogen phthalate");
  REQUIRE(f.parameter("pKa2") != nullptr);
  REQUIRE(f.parameter("titer") != nullptr);
  REQUIRE(f.parameter("c") != nullptr);
  CHECK(f.parameter("pKa2")->value == veq::test::close(kPhthalic2, 1e-6));
  CHECK(f.parameter("pKa1")->value == veq::test::close(kPhthalic1, 1e-6));
  CHECK(f.parameter("titer")->value == veq::test::close(kTiter, 1e-6));
  // The concentration is held at the standard's amount / V0, not fitted.
  CHECK(f.parameter("c")->fixed);
  CHECK(f.parameter("c")->value == veq::test::close(kMass_g / kKhpMolarMass / 0.050, 1e-12));
  // V_eq = n / (t Ct): the one equivalence point of hydrogen phthalate.
  REQUIRE(f.equivalence.size() == 1);
  CHECK(f.equivalence[0].volume_mL == veq::test::close(kMass_g / kKhpMolarMass / (0.1 * kTiter) * 1000.0, 1e-6));
}

TEST_CASE("a standardisation method supplies the standard: titer fitted, result from the fitted volume",
          "[fit][method]") {
  const veq::chem::Simulation sim = khp_run();
  // A noisy run (0.004 pH), so that the fit must pass its checks to be used.
  veq::chem::SimulationOptions so = sim.options;
  so.noise.sd = 0.004;
  so.noise.seed = 606;
  const veq::chem::Simulation noisy = veq::chem::simulate(so);
  const veq::method::Method m = veq::method::parse_method(R"(
name = "NaOH standardisation"
kind = "standardisation"
[standard]
name = "potassium hydrogen phthalate"
mass_g = 0.4085
molar_mass_g_mol = 204.2212
[titrant]
name = "NaOH"
[[result]]
name = "NaOH concentration"
unit = "mol/L titrant"
endpoint = "last"
volume_from = "fit"
)",
                                                          "std.toml");
  veq::AnalyzeOptions ao;
  ao.method = m;
  ao.fit.fit_titer = true;
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(noisy, false, 0.1), ao);
  REQUIRE(a.fit.best);
  CAPTURE(a.results_error);
  std::string flags;
  for (const auto& f : a.fit.best->flags) flags += f + " ";
  CAPTURE(flags);
  CHECK(a.fit.best->model == "potassium hydrogen phthalate");
  REQUIRE(a.fit.usable());
  const auto* t = a.fit.best->parameter("titer");
  REQUIRE(t != nullptr);
  REQUIRE(t->std_error);
  // Within 4 standard errors of the simulated factor (0.004 pH noise).
  CHECK(std::fabs(t->value - kTiter) < 4.0 * *t->std_error);
  REQUIRE(a.results);
  REQUIRE(a.results->results.size() == 1);
  const auto& r = a.results->results[0];
  CHECK(r.volume_source == "fit");
  // c = m / (M V): the fitted volume is n / (t Ct), so the result is t x 0.1 exactly at the fitted t.
  CHECK(r.value == veq::test::close(0.1 * t->value, 1e-9));
}

TEST_CASE("a method's titrant concentration (titer applied) is what the fit uses, not the file's nominal one",
          "[fit][method]") {
  // Acetic acid 0.05 mol/L (pKa 4.756, CRC Handbook, organic acids) titrated with NaOH truly 0.0987 mol/L;
  // the file states the nominal 0.1. The method gives 0.1 mol/L with a titer factor 0.987.
  veq::chem::SimulationOptions so = veq::test::simulation_of({{"acetic acid", 0.05}}, veq::TitrantKind::base, 0.1);
  so.titrant.conc_mol_L = 0.0987;
  const veq::chem::Simulation sim = veq::chem::simulate(so);
  veq::AnalyzeOptions o;
  o.method = veq::method::parse_method(
      "name = \"acetic\"\n[analyte]\nmolar_mass_g_mol = 60.052\n[titrant]\nname = \"NaOH\"\n"
      "concentration_mol_L = 0.1\ntiter = 0.987\n[[result]]\nname = \"acetic acid\"\nunit = \"mol/L\"\n",
      "m.toml");
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(sim, true, 0.1), o);
  REQUIRE(a.used_titrant_conc_mol_L);
  CHECK(*a.used_titrant_conc_mol_L == Approx(0.0987).epsilon(1e-12));
  REQUIRE(a.fit.best);
  const auto* c = a.fit.best->parameter("c");
  REQUIRE(c != nullptr);
  CHECK(c->value == Approx(0.05).epsilon(1e-6));  // with the nominal 0.1 it would be 1.3 % high
  // Without the method the file's nominal concentration is all there is.
  const veq::Analysis b = veq::analyze(veq::test::run_from_simulation(sim, true, 0.1));
  REQUIRE(b.fit.best);
  // (to 1e-4 only: the titrant sodium, hence the ionic strength, is also off by the factor)
  CHECK(b.fit.best->parameter("c")->value == Approx(0.05 / 0.987).epsilon(1e-4));
}
