// SPDX-License-Identifier: MIT
// The fit inside analyze() and the reports: JSON fit object, text summary, consensus, indicators, CLI flags,
// skipped and failed fits, option defaults.
#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "cli/cli.hpp"
#include "fit/fit_support.hpp"
#include "support/approx.hpp"
#include "veq/analyze.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace {

// No number in the JSON is NaN or infinite (nlohmann writes those as null; the fit writes null only for a
// missing standard error, interval or uncertainty, and those keys are checked by name).
bool finite_numbers(const nlohmann::json& j) {
  if (j.is_number_float()) return std::isfinite(j.get<double>());
  if (j.is_array() || j.is_object()) {
    for (const auto& x : j) {
      if (!finite_numbers(x)) return false;
    }
  }
  return true;
}

veq::chem::Simulation acetic(double noise_sd, std::uint64_t seed) {
  // Acetic acid 0.1 mol/L, pKa 4.756 (CRC Handbook, REFERENCES §2), 25 mL with 0.1 mol/L NaOH.
  veq::chem::SimulationOptions o = veq::test::simulation_of({{"acetic acid", 0.1}}, veq::TitrantKind::base, 0.2);
  o.noise.sd = noise_sd;
  o.noise.seed = seed;
  return veq::chem::simulate(o);
}

struct CliResult {
  int code;
  std::string out;
  std::string err;
};

CliResult run_cli(std::vector<std::string> args) {
  args.insert(args.begin(), "veq");
  std::ostringstream out, err;
  const int code = veq::cli::run_cli(args, out, err);
  return {code, out.str(), err.str()};
}

std::string write_run(const std::string& name, const veq::chem::Simulation& sim) {
  const auto dir = std::filesystem::temp_directory_path() / "veq_fit_tests";
  std::filesystem::create_directories(dir);
  const auto p = dir / name;
  std::ofstream(p, std::ios::binary) << veq::chem::format_run(sim, veq::chem::OutputFormat{});
  return p.string();
}

}  // namespace

TEST_CASE("the JSON fit object: model, parameters with intervals, volumes, runner-up, flags, correlation",
          "[fit][report]") {
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(acetic(0.01, 3), false));
  REQUIRE(a.fit.usable());
  const nlohmann::json j = nlohmann::json::parse(veq::report::to_json(a));
  REQUIRE(j.contains("fit"));
  const auto& f = j["fit"];
  CHECK(f["model"] == "weak_acid");
  CHECK(f["status"] == "converged");
  CHECK(f["converged"] == true);
  CHECK(f["usable"] == true);
  CHECK(f["iterations"].get<int>() > 0);
  CHECK(f["residual_sd"].get<double>() == veq::test::close(0.01, 0.3));
  REQUIRE(f["parameters"].is_array());
  bool saw_pKa = false;
  for (const auto& p : f["parameters"]) {
    for (const char* key : {"name", "value", "std_error", "ci95", "unit"}) CHECK(p.contains(key));
    if (p["name"] == "pKa1") {
      saw_pKa = true;
      const double v = p["value"], lo = p["ci95"][0], hi = p["ci95"][1];
      CHECK(lo < v);
      CHECK(v < hi);
      // Within 4 standard errors of the handbook value the run was made with (acetic acid 4.756).
      CHECK(std::fabs(v - 4.756) < 4.0 * p["std_error"].get<double>());
    }
  }
  CHECK(saw_pKa);
  REQUIRE(f["equivalence_volumes_mL"].size() == 1);
  // Stoichiometry: 25 mL x 0.1 / 0.1 = 25 mL.
  CHECK(f["equivalence_volumes_mL"][0].get<double>() == veq::test::close(25.0, 2e-3));
  CHECK(f["runner_up"].is_object());
  CHECK(f["runner_up"].contains("model"));
  CHECK(f["runner_up"].contains("score"));
  CHECK(f["flags"].is_array());
  CHECK(f["correlation"]["matrix"].size() == f["correlation"]["parameters"].size());
  CHECK(finite_numbers(j));
  // The endpoint carries the fitted estimate beside the derivative and Gran ones, and the consensus uses it.
  const auto& e = j["endpoints"][0];
  CHECK(e["methods"].contains("fit"));
  bool in_consensus = false;
  for (const auto& m : e["consensus_methods"]) in_consensus = in_consensus || m == "fit";
  CHECK(in_consensus);
  // The indicators were judged on the fitted curve.
  CHECK(a.indicators.curve_method == "model");
}

TEST_CASE("a run in mV without calibration gets its indicator check from the fitted model", "[fit][report]") {
  // Acetic acid read in mV (E0 414 mV, Nernst slope): the fit gives the pH, the indicators follow.
  veq::chem::SimulationOptions o = veq::test::simulation_of({{"acetic acid", 0.1}}, veq::TitrantKind::base, 0.2);
  o.electrode.signal = veq::SignalKind::mv;
  o.noise.sd = 0.5;
  o.noise.seed = 8;
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(veq::chem::simulate(o), false));
  REQUIRE(a.fit.usable());
  CHECK(a.indicators.curve_method == "model");
  REQUIRE(a.indicators.endpoints.size() == 1);
  REQUIRE(a.indicators.endpoints[0].endpoint_pH);
  // The equivalence pH of 0.05 mol/L acetate: 1/2 (pKw + pKa + log c) = 8.7 (textbook hydrolysis
  // approximation; pKw 13.995, pKa 4.756), less a little for activity.
  CHECK(*a.indicators.endpoints[0].endpoint_pH == veq::test::close(8.7, 0.0, 0.15));
  CHECK_FALSE(a.indicators.endpoints[0].candidates.empty());
}

TEST_CASE("the text summary shows the fit beside the endpoint and a fit paragraph", "[fit][report]") {
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(acetic(0.01, 3), false));
  const std::string t = veq::report::to_text(a);
  CHECK(t.find("      Fit: ") != std::string::npos);
  CHECK(t.find("Fit (charge balance): weak_acid") != std::string::npos);
  CHECK(t.find("pKa1 = ") != std::string::npos);
  CHECK(t.find("runner-up") != std::string::npos);
}

TEST_CASE("without V0 and Ct the fit is skipped with a warning, and the endpoints are still reported",
          "[fit][report]") {
  veq::Run r = veq::test::run_from_simulation(acetic(0.01, 3), false);
  r.facts.sample_volume_mL.reset();
  const veq::Analysis a = veq::analyze(r);
  CHECK(a.fit.status == veq::fit::FitStatus::not_run);
  CHECK_FALSE(a.fit.best);
  REQUIRE(a.endpoints.endpoints.size() == 1);
  bool warned = false;
  for (const auto& w : a.warnings) warned = warned || w.code == "fit_skipped";
  CHECK(warned);
  const nlohmann::json j = nlohmann::json::parse(veq::report::to_json(a));
  CHECK(j["fit"]["status"] == "not_run");
  CHECK(j["fit"]["model"].is_null());
  CHECK(finite_numbers(j));
}

TEST_CASE("a curve no model describes: the fit is flagged, not used, and nothing is NaN", "[fit][report]") {
  // A weak acid fitted as a strong acid, and pure noise with every fact: flags, no NaN, endpoints kept.
  veq::AnalyzeOptions ao;
  ao.fit.model = "strong_acid";
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(acetic(0.01, 3), false), ao);
  REQUIRE(a.fit.best);
  CHECK_FALSE(a.fit.usable());
  const auto& flags = a.fit.best->flags;
  const bool flagged = std::find(flags.begin(), flags.end(), veq::fit::kFlagResidualPattern) != flags.end() ||
                       std::find(flags.begin(), flags.end(), veq::fit::kFlagPoorFit) != flags.end();
  CHECK(flagged);
  CHECK(a.indicators.curve_method == "interpolated");
  CHECK(a.endpoints.endpoints.size() == 1);
  CHECK(finite_numbers(nlohmann::json::parse(veq::report::to_json(a))));

  veq::Run noise;
  noise.source = "noise";
  std::uint64_t state = 12345;
  for (int i = 0; i < 200; ++i) {
    state = state * 6364136223846793005ULL + 1442695040888963407ULL;  // Knuth's MMIX LCG
    noise.volume_mL.push_back(0.1 * i);
    noise.signal_values.push_back(7.0 + static_cast<double>(state >> 11) / 9007199254740992.0 - 0.5);
    noise.line.push_back(static_cast<std::uint32_t>(i + 2));
  }
  noise.facts.sample_volume_mL = 25.0;
  noise.facts.titrant_conc_mol_L = 0.1;
  for (const std::string model : {"", "diprotic_acid"}) {
    veq::AnalyzeOptions o;
    o.fit.model = model;
    const veq::Analysis b = veq::analyze(noise, o);
    CAPTURE(model, b.fit.message);
    CHECK_FALSE(b.fit.usable());
    CHECK(finite_numbers(nlohmann::json::parse(veq::report::to_json(b))));
  }
}

TEST_CASE("bad fit options are input errors that name the problem", "[fit][report]") {
  const veq::Run r = veq::test::run_from_simulation(acetic(0.0, 1), true);
  veq::AnalyzeOptions ao;
  ao.fit.model = "quadruple_acid";
  CHECK_THROWS_AS(veq::analyze(r, ao), veq::InputError);
  ao.fit.model = "weak_base";  // a base model for a base titrant
  CHECK_THROWS_WITH(veq::analyze(r, ao), Catch::Contains("titrated with"));
  ao.fit.model = "weak_acid";
  ao.fit.hold = {{"pKa7", 3.0}};
  CHECK_THROWS_WITH(veq::analyze(r, ao), Catch::Contains("pKa7"));
  ao.fit.hold.clear();
  ao.fit.loss_scale = -1.0;
  CHECK_THROWS_WITH(veq::analyze(r, ao), Catch::Contains("loss_scale"));
}

TEST_CASE("held parameters stay at their value and carry no standard error", "[fit][report]") {
  veq::AnalyzeOptions ao;
  ao.fit.model = "weak_acid";
  ao.fit.hold = {{"pKa1", 4.756}};
  const veq::Analysis a = veq::analyze(veq::test::run_from_simulation(acetic(0.0, 1), true), ao);
  REQUIRE(a.fit.best);
  const auto* p = a.fit.best->parameter("pKa1");
  REQUIRE(p != nullptr);
  CHECK(p->fixed);
  CHECK(p->value == 4.756);
  CHECK_FALSE(p->std_error);
  CHECK(a.fit.best->free_parameters == 2);  // c and the offset
  // In a model selection, candidates without the held parameter are left out; a name none has is an error.
  veq::AnalyzeOptions sel;
  sel.fit.hold = {{"pKa2", 12.5}};
  const veq::Analysis b = veq::analyze(veq::test::run_from_simulation(acetic(0.01, 2), false), sel);
  REQUIRE(b.fit.best);
  REQUIRE(b.fit.best->parameter("pKa2") != nullptr);
  CHECK(b.fit.best->parameter("pKa2")->fixed);
  for (const auto& c : b.fit.candidates) CHECK(c.model != "weak_acid");
  sel.fit.hold = {{"pKa9", 1.0}};
  CHECK_THROWS_WITH(veq::analyze(veq::test::run_from_simulation(acetic(0.01, 2), false), sel), Catch::Contains("pKa9"));
}

TEST_CASE("veq analyze: --model, --no-fit, --fit-hold and the fit in --json", "[fit][cli]") {
  const std::string file = write_run("acetic.csv", acetic(0.01, 5));
  // The file's metadata gives V0 and Ct (written by format_run).
  const CliResult a = run_cli({"analyze", file, "--model", "weak_acid", "--json", "-", "-q"});
  INFO(a.err);
  REQUIRE(a.code == veq::cli::kExitOk);
  const nlohmann::json j = nlohmann::json::parse(a.out);
  CHECK(j["fit"]["model"] == "weak_acid");
  CHECK(j["fit"]["runner_up"].is_null());  // one model, no selection
  const CliResult b = run_cli({"analyze", file, "--no-fit", "--json", "-", "-q"});
  REQUIRE(b.code == veq::cli::kExitOk);
  CHECK(nlohmann::json::parse(b.out)["fit"]["status"] == "not_run");
  const CliResult c = run_cli({"analyze", file, "--fit-hold", "pKa1"});
  CHECK(c.code == veq::cli::kExitUsage);
  CHECK(c.err.find("NAME=VALUE") != std::string::npos);
  const CliResult d = run_cli({"analyze", file, "--model", "nonsense"});
  CHECK(d.code == veq::cli::kExitUsage);
  CHECK(d.err.find("nonsense") != std::string::npos);
  const CliResult e = run_cli({"analyze",
                               file,
                               "--fit-loss",
                               "cauchy",
                               "--fit-criterion",
                               "aicc",
                               "--fit-hold",
                               "pKa1=4.756",
                               "--model",
                               "weak_acid",
                               "--json",
                               "-",
                               "-q"});
  REQUIRE(e.code == veq::cli::kExitOk);
  const nlohmann::json je = nlohmann::json::parse(e.out);
  CHECK(je["fit"]["criterion"] == "aicc");
  for (const auto& p : je["fit"]["parameters"]) {
    if (p["name"] == "pKa1") CHECK(p["fixed"] == true);
  }
}

TEST_CASE("fit default options are pinned", "[options]") {
  const veq::fit::FitOptions o;
  CHECK(o.enabled);
  CHECK(o.model.empty());
  CHECK(o.fit_electrode);
  CHECK_FALSE(o.fit_titer);
  CHECK_FALSE(o.fit_carbonate);
  CHECK_FALSE(o.standard_amount_mmol);
  CHECK(o.hold.empty());
  CHECK(o.loss == veq::fit::LossKind::huber);
  CHECK(o.loss_scale == 3.0);
  CHECK(o.criterion == veq::fit::Criterion::bic);
  CHECK(o.activity == veq::chem::ActivityModel::davies);
  CHECK(o.background_ionic_strength_mol_L == 0.0);
  CHECK(o.max_iterations == 100);
  CHECK(o.function_tolerance == 1e-12);
  CHECK(o.parameter_tolerance == 1e-12);
  CHECK(o.gradient_tolerance == 1e-14);
  CHECK(o.runs_test_alpha == 0.01);
  CHECK(o.max_residual_ratio == 3.0);
  CHECK(o.max_points == 2000);
  CHECK(o.screen_points == 60);
  CHECK(o.validate().empty());
}
