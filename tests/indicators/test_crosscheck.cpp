// SPDX-License-Identifier: MIT
// The manual cross-check and the `veq indicators` / `veq crosscheck` commands.
#include <fmt/format.h>

#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>
#include <string>
#include <vector>

#include "cli/cli.hpp"
#include "indicators/curves.hpp"
#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "veq/analyze.hpp"
#include "veq/indicators/crosscheck.hpp"

namespace fs = std::filesystem;
using veq::indicators::LikelyCause;

namespace {

struct Result {
  int code;
  std::string out;
  std::string err;
};

Result run(std::vector<std::string> args) {
  args.insert(args.begin(), "veq");
  std::ostringstream out, err;
  const int code = veq::cli::run_cli(args, out, err);
  return {code, out.str(), err.str()};
}

// Acetic acid 0.1 mol/L, 10 mL, with 0.1 mol/L NaOH (Veq 10.000 mL by stoichiometry), readings of the
// exact model every 0.25 mL, every 0.01 mL from 9.5 to 10.5 mL, pH written to 4 decimals.
const veq::test::Sample kSample = veq::test::acetic_acid_with_base(10.0);
const std::vector<double> kVolumes = veq::test::dosing(14.0, 0.25, 9.5, 10.5, 0.01);

std::string run_file(const std::string& name, bool with_sample_volume) {
  std::string text = "Sample: XC-1\n";
  if (with_sample_volume) text += "Sample volume: 10 mL\n";
  text += "Titrant: NaOH 0.1 mol/L\nVolume (mL);pH\n";
  for (double v : kVolumes) text += fmt::format("{:.2f};{:.4f}\n", v, veq::test::pH_at_volume(kSample, v));
  const fs::path dir = fs::temp_directory_path() / "veq_crosscheck_tests";
  fs::create_directories(dir);
  const fs::path p = dir / name;
  std::ofstream(p, std::ios::binary) << text;
  return p.string();
}

// Where the model puts phenolphthalein's first pink (pH 8.2) for a 25 mL manual sample of the same
// solution: the curve of a 25 mL sample is that of 10 mL with every volume scaled by 2.5 (same
// concentrations, charge balance), so V = 2.5 V10(8.2).
double model_prediction_25mL() {
  return 2.5 * veq::test::volume_at_pH(kSample, 8.2);
}

// The prediction veq interpolates between readings 0.01 mL apart lies within 2.5 x 0.01 mL of the
// model's (both crossings lie between the same two readings). The manual result agrees within the Class A
// 50 mL burette tolerance, +-0.05 mL (ISO 385; ASTM E287; REFERENCES §10), plus one drop of 0.05 mL
// (textbook; REFERENCES §10): 0.10 mL. So +0.05 mL off the model must agree (0.075 <= 0.10) and +0.20 mL
// must disagree (0.175 > 0.10).
constexpr double kInside_mL = 0.05;
constexpr double kOutside_mL = 0.20;

}  // namespace

TEST_CASE("crosscheck: a manual volume inside the glassware tolerance agrees, outside it disagrees",
          "[indicators][crosscheck][cli]") {
  const std::string f = run_file("acetic.csv", true);
  const double predicted = model_prediction_25mL();
  SECTION("inside") {
    const Result r = run({"crosscheck",
                          f,
                          "--indicator",
                          "phenolphthalein",
                          "--manual-volume",
                          fmt::format("{:.2f}", predicted + kInside_mL),
                          "--manual-sample-volume",
                          "25"});
    INFO(r.out << r.err);
    CHECK(r.code == veq::cli::kExitOk);
    CHECK(r.out.find("the manual titration agrees") != std::string::npos);
    CHECK(r.out.find("ISO 385") != std::string::npos);
    CHECK(r.out.find("Caution") != std::string::npos);
  }
  SECTION("outside") {
    const Result r = run({"crosscheck",
                          f,
                          "--indicator",
                          "phenolphthalein",
                          "--manual-volume",
                          fmt::format("{:.2f}", predicted + kOutside_mL),
                          "--manual-sample-volume",
                          "25"});
    INFO(r.out << r.err);
    CHECK(r.code == veq::cli::kExitFailed);
    CHECK(r.out.find("disagrees by 0.") != std::string::npos);
    // Beyond phenolphthalein's whole colour change (pH 8.2 to 10.0 takes about 0.05 mL here): not the
    // indicator.
    CHECK(r.out.find("likelier cause: reading or titrant") != std::string::npos);
  }
  SECTION("outside, with a looser burette") {
    // 0.20 + one drop 0.05 = 0.25 mL covers the +0.20 mL (+0.025 mL interpolation).
    const Result r = run({"crosscheck",
                          f,
                          "--indicator",
                          "phenolphthalein",
                          "--manual-volume",
                          fmt::format("{:.2f}", predicted + kOutside_mL),
                          "--manual-sample-volume",
                          "25",
                          "--burette-tolerance",
                          "0.2"});
    CHECK(r.code == veq::cli::kExitOk);
  }
}

TEST_CASE("crosscheck --json - adds a crosscheck object to the run's JSON", "[indicators][crosscheck][cli]") {
  const std::string f = run_file("acetic_json.csv", true);
  // The readings are an ideal-solution curve (tests/support/charge_balance.hpp), so the fit is made without
  // activity coefficients: with Davies activity no model of one acid describes them, and the fit is
  // rightly flagged (a poor fit, not used).
  const Result r = run({"crosscheck",
                        f,
                        "--indicator",
                        "Phenolphthalein",
                        "--manual-volume",
                        fmt::format("{:.2f}", model_prediction_25mL()),
                        "--manual-sample-volume",
                        "25",
                        "--fit-ideal",
                        "--json",
                        "-"});
  INFO(r.err);
  REQUIRE(r.code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["schema"] == "veq.run/1");
  const auto& c = j["crosscheck"];
  CHECK(c["indicator"] == "Phenolphthalein");
  CHECK(c["agrees"] == true);
  CHECK(c["statement"] == "agrees");
  CHECK(c["likely_cause"] == "none");
  CHECK(c["scale"].get<double>() == veq::test::close(2.5, 1e-12));
  CHECK(c["tolerance_mL"].get<double>() == veq::test::close(0.10, 1e-9));
  CHECK(std::fabs(c["predicted_mL"].get<double>() - model_prediction_25mL()) <= 0.025);
  // The fit passes its checks on this clean run, so the change is placed on the fitted model (as veq
  // analyze judges indicators) and the prediction carries the endpoint's uncertainty, scaled.
  CHECK(c["curve"] == "model");
  // (both written to 1e-6 mL in the JSON)
  CHECK(std::fabs(c["prediction_uncertainty_mL"].get<double>() -
                  2.5 * j["endpoints"][0]["uncertainty_mL"].get<double>()) <= 3e-6);
  CHECK(c["verdict"] == "suitable");
  // Without the fit it is placed between the readings: 0.01 mL apart they bracket the crossing,
  // u = 2.5 x 0.01 / sqrt(12) (rectangular; JCGM 100:2008 4.3.7).
  const Result nf = run({"crosscheck",
                         f,
                         "--indicator",
                         "Phenolphthalein",
                         "--manual-volume",
                         fmt::format("{:.2f}", model_prediction_25mL()),
                         "--manual-sample-volume",
                         "25",
                         "--no-fit",
                         "--json",
                         "-"});
  REQUIRE(nf.code == 0);
  const auto jn = nlohmann::json::parse(nf.out);
  CHECK(jn["crosscheck"]["curve"] == "interpolated");
  CHECK(jn["crosscheck"]["prediction_uncertainty_mL"].get<double>() ==
        veq::test::close(2.5 * 0.01 / std::sqrt(12.0), 1e-4));
  // The run's endpoint carries its indicators with the documented fields.
  const auto& inds = j["endpoints"][0]["indicators"];
  REQUIRE(inds.is_array());
  REQUIRE_FALSE(inds.empty());
  for (const auto& i : inds) {
    for (const char* k : {"name", "range_pH", "error_percent", "span_mL", "span_drops", "verdict"}) {
      INFO(k);
      CHECK(i.contains(k));
    }
  }
}

TEST_CASE("crosscheck: a manual sample volume without the run's sample volume is an error naming it",
          "[indicators][crosscheck][cli]") {
  const std::string f = run_file("acetic_no_v0.csv", false);
  const std::string manual = fmt::format("{:.2f}", model_prediction_25mL());
  const Result r = run(
      {"crosscheck", f, "--indicator", "phenolphthalein", "--manual-volume", manual, "--manual-sample-volume", "25"});
  CHECK(r.code == veq::cli::kExitUsage);
  CHECK(r.err.find("the run's sample volume is not known") != std::string::npos);
  CHECK(r.err.find("--sample-volume") != std::string::npos);
  // Given on the command line, it works.
  CHECK(run({"crosscheck",
             f,
             "--indicator",
             "phenolphthalein",
             "--manual-volume",
             manual,
             "--manual-sample-volume",
             "25",
             "--sample-volume",
             "10"})
            .code == veq::cli::kExitOk);
  // Without a manual sample volume the same sample size is assumed, and said.
  const Result same = run({"crosscheck",
                           f,
                           "--indicator",
                           "phenolphthalein",
                           "--manual-volume",
                           fmt::format("{:.2f}", veq::test::volume_at_pH(kSample, 8.2))});
  CHECK(same.code == veq::cli::kExitOk);
  CHECK(same.out.find("same sample size") != std::string::npos);
}

TEST_CASE("crosscheck: bad input exits 2 with a clear message", "[indicators][crosscheck][cli]") {
  const std::string f = run_file("acetic_bad.csv", true);
  const Result unknown = run({"crosscheck", f, "--indicator", "phenolphtalein", "--manual-volume", "10"});
  CHECK(unknown.code == veq::cli::kExitUsage);
  CHECK(unknown.err.find("close matches: Phenolphthalein") != std::string::npos);
  CHECK(run({"crosscheck", f, "--indicator", "phenolphthalein"}).code == veq::cli::kExitUsage);
  CHECK(run({"crosscheck", f, "--indicator", "phenolphthalein", "--manual-volume", "-3"}).code == veq::cli::kExitUsage);
  // Methyl violet changes at pH 0.0-1.6; the run starts at pH 2.9 (0.1 mol/L acetic acid), already past it.
  const Result never = run({"crosscheck", f, "--indicator", "methyl violet", "--manual-volume", "10"});
  CHECK(never.code == veq::cli::kExitUsage);
  CHECK(never.err.find("is not seen in this run") != std::string::npos);
  CHECK(never.err.find("Phenolphthalein") != std::string::npos);  // the hint names what does change there
}

TEST_CASE("crosscheck names the indicator as the likelier cause inside its colour change or at equivalence",
          "[indicators][crosscheck]") {
  // Documented rule (DEVELOPERS.md, Visual indicators): a disagreement inside the indicator's whole
  // colour change, or at the equivalence point, is put down to the indicator. Volumes from the model:
  // bromothymol blue changes between pH 6.0 and 7.6, methyl red between 4.4 and 6.2, both well before
  // acetic acid's equivalence point.
  const veq::Analysis a = veq::analyze(veq::test::model_run(kSample, kVolumes));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  veq::indicators::ManualTitration m;
  m.sample_volume_mL = 25.0;
  m.indicator = "bromothymol blue";
  m.volume_mL = 2.5 * 0.5 * (veq::test::volume_at_pH(kSample, 6.0) + veq::test::volume_at_pH(kSample, 7.6));
  auto r = veq::indicators::crosscheck(a.run, a.curve, a.endpoints, m);
  CHECK_FALSE(r.agrees);
  CHECK(r.likely_cause == LikelyCause::indicator);
  CHECK(r.explanation.find("within it") != std::string::npos);

  m.indicator = "methyl red";
  m.volume_mL = 25.0;  // the equivalence point of a 25 mL sample (stoichiometry)
  r = veq::indicators::crosscheck(a.run, a.curve, a.endpoints, m);
  CHECK_FALSE(r.agrees);
  CHECK(r.likely_cause == LikelyCause::indicator);
  CHECK(r.explanation.find("equivalence point") != std::string::npos);
  CHECK_FALSE(r.notes.empty());  // methyl red is unsuitable for this endpoint, and the result says so
  CHECK(r.statement.find("disagrees by") == 0);
}

TEST_CASE("veq indicators lists the table; --ph lists those that bracket a pH", "[indicators][cli]") {
  const Result all = run({"indicators"});
  CHECK(all.code == 0);
  std::size_t lines = 0;
  for (const auto& row : veq::indicators::IndicatorTable::builtin().rows()) {
    if (all.out.find(row.name) != std::string::npos) ++lines;
  }
  CHECK(lines == veq::indicators::IndicatorTable::builtin().rows().size());
  CHECK(all.out.find("Caution") != std::string::npos);
  // pH 8.7, the end of acetic acid with NaOH: phenolphthalein and thymol blue (2nd) (REFERENCES §1,
  // "Choice"); thymol blue (8.0-9.6, midpoint 8.8) lies closest.
  const Result at = run({"indicators", "--ph", "8.7"});
  CHECK(at.code == 0);
  CHECK(at.out.find("Phenolphthalein") != std::string::npos);
  CHECK(at.out.find("Methyl orange") == std::string::npos);
  CHECK(at.out.find("Thymol blue (alkaline range)") < at.out.find("Phenolphthalein"));
  const Result sources = run({"indicators", "--sources"});
  CHECK(sources.out.find("source: Wikipedia") != std::string::npos);
  CHECK(run({"indicators", "--ph", "20"}).code == veq::cli::kExitUsage);
  CHECK(run({"indicators", "--ph", "14.5"}).out.find("No indicator in the table") != std::string::npos);
}

TEST_CASE("analyze prints a line of indicators under each endpoint", "[indicators][cli]") {
  const Result r = run({"analyze", run_file("acetic_text.csv", true)});
  CHECK(r.code == 0);
  CHECK(r.out.find("    Indicators: ") != std::string::npos);
  CHECK(r.out.find("Phenolphthalein suitable") != std::string::npos);
  CHECK(r.out.find("Caution") != std::string::npos);
}

TEST_CASE("default options are pinned: crosscheck", "[options][indicators]") {
  const veq::indicators::CrosscheckOptions o;
  // Class A 50 mL burette: +-0.05 mL (ISO 385; ASTM E287; REFERENCES §10).
  CHECK(o.burette_tolerance_mL == 0.05);
  CHECK(o.indicator.drop_volume_mL == 0.05);
  CHECK(o.validate().empty());
  veq::indicators::CrosscheckOptions bad;
  bad.burette_tolerance_mL = -1.0;
  REQUIRE(bad.validate().size() == 1);
  CHECK(bad.validate()[0].find("burette_tolerance_mL = -1") == 0);
}
