// SPDX-License-Identifier: MIT
// Methods, results, uncertainty budgets, titers and replicates against published values.
#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <random>

#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "veq/analyze.hpp"
#include "veq/method/method.hpp"
#include "veq/method/replicates.hpp"
#include "veq/method/result.hpp"
#include "veq/method/titer.hpp"

using veq::method::FormulaInputs;
using veq::method::ResultUnit;

namespace {

veq::InputError method_error(const std::string& toml) {
  try {
    (void)veq::method::parse_method(toml, "m.toml");
  } catch (const veq::InputError& e) {
    return e;
  }
  FAIL("no error for:\n" << toml);
  throw std::logic_error("unreachable");
}

}  // namespace

TEST_CASE("standardisation arithmetic: potassium hydrogen phthalate worked example", "[method][reference]") {
  // c = m z / (M V_eq): 0.5366 g KHP (204.22 g/mol), 13.1606 mL NaOH -> 0.1997 mol/L
  // (REFERENCES §8, derived; KHP molar mass: BAM certificate / Ph. Eur.).
  FormulaInputs in;
  in.unit = ResultUnit::titrant_mol_L;
  in.volume_mL = 13.1606;
  in.sample_mass_g = 0.5366;
  in.molar_mass_g_mol = 204.22;
  CHECK(veq::method::formula_value(in) == veq::test::close(0.1997, 0.0, 5e-5));
}

TEST_CASE("total alkalinity at pH 4.5 by the Standard Methods 2320 B formula", "[method][reference]") {
  // SM 2320 B: alkalinity, mg CaCO3/L = A x N x 50 000 / mL sample, A the titrant volume to pH 4.5.
  // Sample: 100 mL of 2.5 mmol/L bicarbonate (carbonic acid pKa 6.35 / 10.33, CRC-inorg) with
  // 0.02 mol/L HCl; A is computed exactly from the charge balance in the test.
  veq::test::Sample s;
  s.V0_mL = 100.0;
  s.weak = {{0.0025, {6.35, 10.33}}};
  s.strong_base = 0.0025;  // NaHCO3: one Na+ per carbonate
  s.titrant = -0.02;
  veq::Run r;
  r.source = "alk";
  for (int i = 0; i <= 160; ++i) {
    const double v = 0.1 * i;
    r.volume_mL.push_back(v);
    r.signal_values.push_back(veq::test::pH_at_volume(s, v));
    r.line.push_back(static_cast<std::uint32_t>(i + 1));
  }
  const veq::method::Method m = veq::method::parse_method(R"(
name = "alk"
[sample]
volume_mL = 100
[titrant]
concentration_mol_L = 0.02
[[result]]
name = "T"
unit = "mg/L as CaCO3"
at_pH = 4.5
)",
                                                          "alk.toml");
  veq::AnalyzeOptions o;
  o.method = m;
  const veq::Analysis a = veq::analyze(r, o);
  REQUIRE(a.results.has_value());
  REQUIRE(a.results->results.size() == 1);
  const auto& res = a.results->results[0];
  const double A = veq::test::volume_at_pH(s, 4.5);
  CHECK(res.endpoint_volume_mL == veq::test::close(A, 0.0, 0.01));
  CHECK(res.value == veq::test::close(A * 0.02 * 50000.0 / 100.0, 2e-3));
  // 2.5 mmol/L HCO3- is 125 mg/L as CaCO3 (50.04 mg CaCO3 per meq, REFERENCES §9); at pH 4.5 the
  // titration slightly overshoots the equivalence (the endpoint pH of SM 2320 B).
  CHECK(res.value == veq::test::close(125.0, 0.03));
}

TEST_CASE("acid number formula of ASTM D664 and percent by mass", "[method][reference]") {
  // ASTM D664: acid number = (A - B) M 56.1 / W: (1.25 - 0.10) mL x 0.1 mol/L x 56.1 / 5.00 g = 1.2903.
  FormulaInputs in;
  in.unit = ResultUnit::mg_KOH_per_g;
  in.volume_mL = 1.25;
  in.blank_mL = 0.10;
  in.conc_mol_L = 0.1;
  in.sample_mass_g = 5.00;
  CHECK(veq::method::formula_value(in) == veq::test::close(1.15 * 0.1 * 56.1 / 5.0, 1e-12));
  // % (w/w) = (V - Vb) Ct nu M / (10 m): 20.00 mL x 0.1 mol/L x 60.05 g/mol / (10 x 2.000 g) = 6.005 %
  // (mmol x mg/mmol = mg; /(1000 m) x 100; common practice, no source).
  in.unit = ResultUnit::percent_w_w;
  in.volume_mL = 20.0;
  in.blank_mL = 0.0;
  in.molar_mass_g_mol = 60.05;
  in.sample_mass_g = 2.0;
  CHECK(veq::method::formula_value(in) == veq::test::close(6.005, 1e-12));
}

TEST_CASE("Grubbs critical values for n = 3 to 10 at alpha = 0.05", "[method][reference]") {
  // ISO 5725-2:1994 Table 5, single Grubbs test, 5 % (two-sided); also ASTM E178 (from memory).
  const double table[] = {1.155, 1.481, 1.715, 1.887, 2.020, 2.126, 2.215, 2.290};
  for (std::size_t n = 3; n <= 10; ++n) {
    INFO("n = " << n);
    CHECK(veq::method::grubbs_critical(n, 0.05) == veq::test::close(table[n - 3], 0.0, 1.5e-3));
  }
}

TEST_CASE("replicate statistics: mean, SD, Student-t interval, Grubbs flag", "[method]") {
  const std::vector<double> x = {10.02, 10.05, 9.98};
  const auto s = veq::method::replicate_stats(x);
  CHECK(s.n == 3);
  CHECK(s.mean == veq::test::close(10.016666666, 1e-9));
  CHECK(s.sd == veq::test::close(0.035118845, 1e-6));
  // t(0.975, 2) = 4.303 (Student's t table, e.g. NIST/SEMATECH e-Handbook 1.3.6.7.2).
  CHECK(s.ci95_high - s.mean == veq::test::close(4.303 * 0.035118845 / std::sqrt(3.0), 1e-3));
  CHECK_FALSE(s.outlier.has_value());
  // One value far from six others is flagged, and kept.
  const std::vector<double> y = {5.01, 5.03, 4.99, 5.02, 5.00, 5.01, 5.40};
  const auto t = veq::method::replicate_stats(y);
  REQUIRE(t.outlier.has_value());
  CHECK(*t.outlier == 6);
  CHECK(t.n == 7);
}

TEST_CASE("propagated uncertainty agrees with a Monte Carlo propagation within 5 %", "[method][reference]") {
  // GUM Supplement 1 (JCGM 101:2008): propagation of distributions by Monte Carlo; for a
  // nearly linear model the first-order (GUM) result must agree.
  FormulaInputs in;
  in.unit = ResultUnit::g_L;
  in.volume_mL = 18.74;
  in.volume_u_mL = 0.004;
  in.burette_u_mL = 0.05 / std::sqrt(3.0);
  in.blank_mL = 0.05;
  in.blank_u_mL = 0.01;
  in.conc_mol_L = 0.1;
  in.conc_u_mol_L = 0.0003;
  in.titer = 0.987;
  in.titer_u = 0.001;
  in.molar_mass_g_mol = 36.46;
  in.sample_volume_mL = 20.0;
  in.sample_volume_u_mL = 0.03 / std::sqrt(3.0);
  double u = 0;
  (void)veq::method::uncertainty_budget(in, u);
  std::mt19937_64 rng(42);
  std::normal_distribution<double> g(0.0, 1.0);
  std::uniform_real_distribution<double> rect(-1.0, 1.0);
  const int n = 200000;
  double sum = 0, sum2 = 0;
  for (int i = 0; i < n; ++i) {
    FormulaInputs x = in;
    x.volume_mL += in.volume_u_mL * g(rng) + 0.05 * rect(rng);  // burette tolerance: rectangular ±0.05 mL
    x.blank_mL += in.blank_u_mL * g(rng);
    x.conc_mol_L += in.conc_u_mol_L * g(rng);
    x.titer += in.titer_u * g(rng);
    x.sample_volume_mL += 0.03 * rect(rng);  // pipette tolerance: rectangular ±0.03 mL
    const double r = veq::method::formula_value(x);
    sum += r;
    sum2 += r * r;
  }
  const double mean = sum / n;
  const double sd = std::sqrt(sum2 / n - mean * mean);
  CHECK(u == veq::test::close(sd, 0.05));
}

TEST_CASE("titer files round-trip", "[method]") {
  veq::method::TiterRecord t;
  t.titrant = "NaOH";
  t.concentration_mol_L = 0.098689;
  t.uncertainty_mol_L = 0.000116;
  t.nominal_mol_L = 0.1;
  t.standard = "potassium hydrogen phthalate";
  const auto path = std::filesystem::temp_directory_path() / "veq_titer_test.toml";
  std::ofstream(path) << veq::method::titer_to_toml(t);
  const auto back = veq::method::load_titer(path);
  CHECK(back.concentration_mol_L == t.concentration_mol_L);
  CHECK(back.uncertainty_mol_L == t.uncertainty_mol_L);
  CHECK(back.titrant == "NaOH");
  std::filesystem::remove(path);
}

TEST_CASE("every method template reads back", "[method]") {
  for (const auto& kind : veq::method::method_kinds()) {
    INFO(kind);
    CHECK_NOTHROW(veq::method::parse_method(veq::method::method_template(kind), kind + ".toml"));
  }
  CHECK_THROWS_AS(veq::method::method_template("colour"), veq::InputError);
}

TEST_CASE("bad method files name the key and the line", "[method][bad]") {
  SECTION("missing key") {
    const auto e = method_error("name = \"x\"\n[[result]]\nname = \"r\"\n");
    CHECK(e.where().line == 2);
    CHECK(e.message().find("result.unit") != std::string::npos);
    const auto e2 = method_error("[sample]\nvolume_mL = 10\n");
    CHECK(e2.message().find("'name'") != std::string::npos);
  }
  SECTION("wrong unit") {
    const auto e = method_error("name = \"x\"\n\n[[result]]\nunit = \"furlongs\"\n");
    CHECK(e.where().line == 4);
    CHECK(e.message().find("'result.unit' = 'furlongs'") != std::string::npos);
  }
  SECTION("negative mass") {
    const auto e = method_error("name = \"x\"\n[sample]\nmass_g = -2.5\n[[result]]\nunit = \"mg KOH/g\"\n");
    CHECK(e.where().line == 3);
    CHECK(e.message().find("'sample.mass_g'") != std::string::npos);
    CHECK(e.message().find("positive") != std::string::npos);
  }
  SECTION("misspelt key") {
    const auto e = method_error("name = \"x\"\n[sample]\nvolume_ml = 25\n[[result]]\nunit = \"mol/L\"\n");
    CHECK(e.where().line == 3);
    CHECK(e.message().find("unknown key 'sample.volume_ml'") != std::string::npos);
    CHECK(e.hint().find("sample.volume_mL") != std::string::npos);
  }
  SECTION("molar mass needed for g/L") {
    const auto e = method_error("name = \"x\"\n[[result]]\nunit = \"g/L\"\n");
    CHECK(e.message().find("analyte.molar_mass_g_mol") != std::string::npos);
  }
  SECTION("TOML syntax") {
    const auto e = method_error("name = \"x\n");
    CHECK(e.where().line == 1);
  }
  SECTION("an endpoint number that is not a whole number (regression: fuzz_method found 7e107 undefined)") {
    const auto e =
        method_error("name = \"x\"\n[[result]]\nunit = \"mol/L\"\nendpoint = 7" + std::string(106, '0') + ".0\n");
    CHECK(e.where().line == 4);
    CHECK(e.message().find("whole number") != std::string::npos);
    const auto big = method_error("name = \"x\"\n[[result]]\nunit = \"mol/L\"\nendpoint = 9000000000\n");
    CHECK(big.message().find("1 to 100") != std::string::npos);
  }
  SECTION("a titer file that is missing") {
    const auto e =
        method_error("name = \"x\"\n[titrant]\ntiter_file = \"/nonexistent/t.toml\"\n[[result]]\nunit = \"mol/L\"\n");
    CHECK(e.where().line == 3);
    CHECK(e.message().find("titer_file") != std::string::npos);
  }
}

TEST_CASE("a method the run cannot satisfy fails the result, not the endpoints", "[method]") {
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  veq::Run r;
  r.source = "no_volume";
  for (int i = 0; i <= 300; ++i) {
    r.volume_mL.push_back(0.1 * i);
    r.signal_values.push_back(veq::test::pH_at_volume(s, 0.1 * i));
    r.line.push_back(static_cast<std::uint32_t>(i + 1));
  }
  veq::AnalyzeOptions o;
  o.method = veq::method::parse_method(
      "name = \"x\"\n[titrant]\nconcentration_mol_L = 0.1\n[[result]]\nunit = \"mol/L\"\n", "m.toml");
  const veq::Analysis a = veq::analyze(r, o);
  CHECK(a.endpoints.endpoints.size() == 1);
  CHECK_FALSE(a.results.has_value());
  CHECK(a.results_error.find("sample volume") != std::string::npos);
  // With the sample volume, the result: 0.1 mol/L HCl (stoichiometry, V0 = Veq).
  r.facts.sample_volume_mL = 20.0;
  const veq::Analysis b = veq::analyze(r, o);
  REQUIRE(b.results.has_value());
  CHECK(b.results->results[0].value == veq::test::close(0.1, 2e-3));
  CHECK(b.results->results[0].uncertainty > 0);
}

TEST_CASE("spec verdicts: pass, fail, borderline within the expanded uncertainty", "[method]") {
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  veq::Run r;
  r.source = "spec";
  r.facts.sample_volume_mL = 20.0;
  for (int i = 0; i <= 300; ++i) {
    r.volume_mL.push_back(0.1 * i);
    r.signal_values.push_back(veq::test::pH_at_volume(s, 0.1 * i));
    r.line.push_back(static_cast<std::uint32_t>(i + 1));
  }
  auto verdict = [&](const std::string& limits) {
    veq::AnalyzeOptions o;
    o.method = veq::method::parse_method(
        "name = \"x\"\n[titrant]\nconcentration_mol_L = 0.1\n[[result]]\nunit = \"mol/L\"\n" + limits, "m.toml");
    const veq::Analysis a = veq::analyze(r, o);
    REQUIRE(a.results.has_value());
    return a.results->results[0].verdict;
  };
  CHECK(verdict("spec_low = 0.09\nspec_high = 0.11\n") == "pass");
  CHECK(verdict("spec_low = 0.11\nspec_high = 0.12\n") == "fail");
  CHECK(verdict("spec_high = 0.1001\n") == "borderline");
  CHECK(verdict("") == "");
}

TEST_CASE("inputs the fuzzer found stay clear errors (tests/data/fuzz_regressions)", "[method][bad]") {
  // Every method-file input that once crashed or misbehaved under fuzz_method: now an InputError
  // with a line, never undefined behaviour (the sanitizer build runs this too).
  int seen = 0;
  for (const auto& entry : std::filesystem::directory_iterator(VEQ_TEST_DATA "/fuzz_regressions")) {
    if (entry.path().extension() != ".toml") continue;
    ++seen;
    std::ifstream in(entry.path(), std::ios::binary);
    const std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
    CAPTURE(entry.path().filename().string());
    CHECK_THROWS_AS(veq::method::parse_method(text, entry.path().filename().string()), veq::InputError);
  }
  CHECK(seen >= 1);
}
