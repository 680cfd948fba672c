// SPDX-License-Identifier: MIT
// The simulator: balances at every point, dosing, noise, determinism, and every dialect read back by ingest.
#include <fmt/format.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "cli/cli.hpp"
#include "support/approx.hpp"
#include "veq/analyze.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/simulate.hpp"
#include "veq/ingest/reader.hpp"

using veq::test::close;
namespace chem = veq::chem;
namespace fs = std::filesystem;

namespace {

chem::SimulationOptions mixture(chem::ActivityModel activity) {
  chem::SimulationOptions o;
  o.sample.volume_mL = 20.0;
  o.sample.analytes = {chem::analyte("phosphoric acid", 0.02),
                       chem::analyte("acetic acid", 0.03),
                       chem::analyte("ammonium chloride", 0.01),
                       chem::analyte("citric acid", 0.005)};
  o.sample.background_ionic_strength_mol_L = 0.01;
  o.titrant.conc_mol_L = 0.1;
  o.titrant.carbonate_fraction = 0.01;
  o.model.activity = activity;
  o.dosing.mode = chem::DosingMode::dynamic;
  o.dosing.target_dpH = 0.08;
  o.dosing.final_volume_mL = 25.0;
  return o;
}

}  // namespace

TEST_CASE("mass and charge balance hold to 1e-12 at every simulated point", "[chem][simulate]") {
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    const chem::SimulationOptions o = mixture(activity);
    const chem::Simulation sim = chem::simulate(o);
    REQUIRE(sim.readings.size() > 50);
    const chem::Model<double>& m = sim.model;
    for (const auto& r : sim.readings) {
      INFO("V = " << r.volume_mL << ", activity " << chem::to_string(activity));
      const double d = o.sample.volume_mL / (o.sample.volume_mL + r.volume_mL);
      const auto species = chem::speciation(o.sample, m, r.volume_mL, r.state);
      REQUIRE(species.size() == 5);  // four analytes and the titrant's carbonate
      // Electroneutrality, sum z c = 0, written out ion by ion (textbook charge balance):
      const double h = std::pow(10.0, r.state.log10_h);
      const double oh = std::pow(10.0, -m.pKw - 2 * r.state.log10_gamma1 - r.state.log10_h);
      const double na = (1 - d) * o.titrant.conc_mol_L;  // titrant cation
      double positive = h + na, negative = oh;
      double ionic = 0.5 * (h + oh + na) + d * o.sample.background_ionic_strength_mol_L;
      for (std::size_t k = 0; k < species.size(); ++k) {
        const bool titrant = k == 4;
        const double total = titrant ? (1 - d) * m.titrant_carbonate.conc_mol_L : d * o.sample.analytes[k].conc_mol_L;
        double sum = 0.0;
        for (const auto& f : species[k].forms) {
          sum += f.conc_mol_L;
          (f.charge > 0 ? positive : negative) += std::abs(f.charge) * f.conc_mol_L;
          ionic += 0.5 * f.charge * f.charge * f.conc_mol_L;
        }
        // Mass balance: the forms add up to the analytical concentration.
        CHECK(sum == close(total, 1e-12));
        if (!titrant) {
          // Spectator ions of the added form (Cl- for NH4Cl); univalent.
          const int q = o.sample.analytes[k].top_charge - o.sample.analytes[k].added_form;
          (q > 0 ? negative : positive) += std::abs(q) * d * o.sample.analytes[k].conc_mol_L;
          ionic += 0.5 * std::abs(q) * d * o.sample.analytes[k].conc_mol_L;
        }
      }
      CHECK(std::fabs(positive - negative) <= 1e-12 * (positive + negative));
      CHECK(r.state.ionic_strength_mol_L == close(ionic, 1e-12));
    }
  }
}

TEST_CASE("simulated truth: equivalence points and their pH", "[chem][simulate]") {
  chem::SimulationOptions o;
  o.sample.analytes = {chem::analyte("phosphoric acid", 0.05)};
  o.model.activity = chem::ActivityModel::ideal;
  const chem::Simulation sim = chem::simulate(o);
  REQUIRE(sim.equivalence_points.size() == 3);
  // Default end of dosing: 1.3 x the last equivalence volume (37.5 mL), in steps of 0.1 mL.
  CHECK(sim.readings.back().volume_mL <= 1.3 * 37.5);
  CHECK(sim.readings.back().volume_mL > 1.3 * 37.5 - 0.1);
  const auto j = nlohmann::json::parse(chem::truth_json(sim));
  CHECK(j["schema"] == "veq.truth/1");
  REQUIRE(j["equivalence_points"].size() == 3);
  for (int k = 0; k < 3; ++k) {
    // Stoichiometry: 25 mL x 0.05 x (k+1) / 0.1.
    CHECK(j["equivalence_points"][k]["volume_mL"].get<double>() == close(12.5 * (k + 1), 1e-14));
    CHECK(j["equivalence_points"][k]["pH"].get<double>() ==
          close(chem::Titration<double>(sim.model).pH(12.5 * (k + 1)), 1e-14));
    CHECK(j["equivalence_points"][k]["step"] == k + 1);
  }
  CHECK(j["readings"]["count"] == sim.readings.size());
  // Through the whole pipeline: endpoint detection finds the first two and not the third, which water's
  // own buffering hides (textbook).
  chem::OutputFormat f;
  const veq::Analysis a = veq::analyze(veq::ingest::parse_run(chem::format_run(sim, f), "phosphoric.csv"));
  REQUIRE(a.endpoints.endpoints.size() == 2);
  CHECK(a.endpoints.endpoints[0].volume_mL == close(12.5, 0.0, 0.05));
  CHECK(a.endpoints.endpoints[1].volume_mL == close(25.0, 0.0, 0.05));
}

TEST_CASE("dynamic dosing takes small steps at the jump and large ones in the buffer", "[chem][simulate]") {
  chem::SimulationOptions o;
  o.sample.analytes = {chem::analyte("acetic acid", 0.1)};
  o.dosing.mode = chem::DosingMode::dynamic;
  o.dosing.target_dpH = 0.1;
  o.dosing.min_step_mL = 0.01;
  o.dosing.max_step_mL = 0.5;
  const chem::Simulation sim = chem::simulate(o);
  double smallest_near_eq = 1e9, largest = 0.0;
  for (std::size_t i = 1; i < sim.readings.size(); ++i) {
    const double step = sim.readings[i].volume_mL - sim.readings[i - 1].volume_mL;
    CHECK(step >= 0.01 - 1e-12);
    CHECK(step <= 0.5 + 1e-12);
    // Volumes are multiples of the burette resolution (0.001 mL).
    CHECK(std::fabs(sim.readings[i].volume_mL * 1000 - std::round(sim.readings[i].volume_mL * 1000)) < 1e-9);
    largest = std::max(largest, step);
    if (std::fabs(sim.readings[i].volume_mL - 25.0) < 0.2) smallest_near_eq = std::min(smallest_near_eq, step);
    // Where the step is not at a bound, the pH change is near the target (within the 1.5x overshoot rule).
    const double dpH = std::fabs(sim.readings[i].pH_true - sim.readings[i - 1].pH_true);
    if (step > 0.01 + 1e-9) CHECK(dpH <= 0.15 + 1e-9);
  }
  CHECK(largest == close(0.5, 1e-9));
  CHECK(smallest_near_eq == close(0.01, 1e-9));
}

TEST_CASE("noise, drift and outliers have the asked-for size; same seed, same bytes", "[chem][simulate]") {
  chem::SimulationOptions o;
  o.sample.analytes = {chem::analyte("benzoic acid", 0.05)};
  o.dosing.step_mL = 0.01;
  o.dosing.final_volume_mL = 20.0;
  o.electrode.signal = veq::SignalKind::mv;
  o.electrode.slope_efficiency = 0.97;
  o.noise.sd = 0.5;
  o.noise.seed = 2024;
  const chem::Simulation sim = chem::simulate(o);
  REQUIRE(sim.readings.size() == 2001);
  double sum = 0.0, sum2 = 0.0;
  for (const auto& r : sim.readings) {
    // Electrode: E = E0 - efficiency x Nernst slope x pH (Nernst equation; 59.159 mV at 25 °C, CODATA 2018).
    CHECK(r.signal_true == close(414.0 - 0.97 * 59.159 * r.pH_true, 0.0, 0.001 * r.pH_true + 1e-9));
    const double e = r.signal - r.signal_true;
    sum += e;
    sum2 += e * e;
  }
  const double n = static_cast<double>(sim.readings.size());
  const double mean = sum / n, sd = std::sqrt(sum2 / n - mean * mean);
  // Sample SD of 2001 normal draws: within 5 % of sigma (its standard error is sigma/sqrt(2n) = 1.6 %),
  // mean within 4 standard errors (0.045).
  CHECK(sd == close(0.5, 0.05));
  CHECK(std::fabs(mean) < 4 * 0.5 / std::sqrt(n));

  chem::OutputFormat f;
  const std::string a = chem::format_run(sim, f);
  CHECK(chem::format_run(chem::simulate(o), f) == a);
  chem::SimulationOptions other = o;
  other.noise.seed = 2025;
  CHECK(chem::format_run(chem::simulate(other), f) != a);

  // Drift: a linear trend of drift_per_min per minute of reading time.
  chem::SimulationOptions drifting = o;
  drifting.noise.sd = 0.0;
  drifting.noise.drift_per_min = 0.3;
  drifting.noise.reading_interval_s = 6.0;
  const chem::Simulation ds = chem::simulate(drifting);
  CHECK(ds.readings.back().signal - ds.readings.back().signal_true == close(0.3 * 2000 * 6.0 / 60.0, 1e-9));
  // Outliers: about the asked-for fraction (binomial, 2001 draws at 5 %: SD 0.49 %), each of the asked size.
  chem::SimulationOptions spiky = o;
  spiky.noise.sd = 0.0;
  spiky.noise.outlier_fraction = 0.05;
  spiky.noise.outlier_size = 40.0;
  const chem::Simulation ss = chem::simulate(spiky);
  int count = 0;
  for (const auto& r : ss.readings) {
    if (r.outlier) {
      ++count;
      CHECK(std::fabs(r.signal - r.signal_true) == close(40.0, 1e-9));
    } else {
      CHECK(r.signal == r.signal_true);
    }
  }
  CHECK(count > 0.05 * n - 4 * 0.0049 * n);
  CHECK(count < 0.05 * n + 4 * 0.0049 * n);
}

TEST_CASE("ingest reads back every dialect simulate writes, to the last digit", "[chem][simulate][ingest]") {
  chem::SimulationOptions o;
  o.sample_id = "RT-7";
  o.sample.volume_mL = 24.5;
  o.sample.analytes = {chem::analyte("acetic acid", 0.0812)};
  o.titrant.conc_mol_L = 0.1025;
  o.model.temperature_C = 22.5;
  o.dosing.mode = chem::DosingMode::dynamic;
  o.dosing.final_volume_mL = 26.0;
  o.noise.sd = 0.002;
  const char separators[] = {',', ';', '\t', '|', ' '};
  const char* units[] = {"mL", "uL", "L"};
  const chem::MetadataStyle styles[] = {
      chem::MetadataStyle::colon, chem::MetadataStyle::equals, chem::MetadataStyle::comma, chem::MetadataStyle::none};
  const std::vector<std::vector<std::string>> orders = {{"volume", "signal"},
                                                        {"signal", "volume"},
                                                        {"time", "volume", "signal", "temperature"},
                                                        {"volume", "temperature", "signal"}};
  int combination = 0;
  for (const auto signal : {veq::SignalKind::ph, veq::SignalKind::mv}) {
    o.electrode.signal = signal;
    o.noise.sd = signal == veq::SignalKind::mv ? 0.1 : 0.002;
    const chem::Simulation sim = chem::simulate(o);
    for (char sep : separators) {
      for (char dec : {'.', ','}) {
        if (sep == ',' && dec == ',') continue;
        ++combination;
        chem::OutputFormat f;
        f.separator = sep;
        f.decimal = dec;
        f.volume_unit = units[combination % 3];
        f.metadata = styles[combination % 4];
        f.columns = orders[static_cast<std::size_t>(combination) % orders.size()];
        f.crlf = combination % 2 == 0;
        f.write_calibration = signal == veq::SignalKind::mv && combination % 3 == 0;
        const std::string text = chem::format_run(sim, f);
        INFO("separator '" << sep << "', decimal '" << dec << "', unit " << f.volume_unit << ", metadata "
                           << static_cast<int>(f.metadata) << ", columns " << f.columns.size() << ", "
                           << (signal == veq::SignalKind::mv ? "mV" : "pH") << "\n"
                           << text.substr(0, 400));
        const veq::Run run = veq::ingest::parse_run(text, "sim.txt");
        CHECK(run.dialect.separator == sep);
        CHECK(run.dialect.decimal == dec);
        CHECK(run.dialect.line_ending == (f.crlf ? "crlf" : "lf"));
        CHECK(run.signal == signal);
        REQUIRE(run.volume_mL.size() == sim.readings.size());
        // The digits written: volumes to the burette resolution (3 decimals in mL; 0 in uL, 6 in L),
        // pH to 3 decimals, mV to 1.
        const double per_mL = f.volume_unit == "uL" ? 1000.0 : f.volume_unit == "L" ? 0.001 : 1.0;
        const int vd = f.volume_unit == "uL" ? 0 : f.volume_unit == "L" ? 6 : 3;
        const int sd = signal == veq::SignalKind::mv ? 1 : 3;
        for (std::size_t i = 0; i < sim.readings.size(); ++i) {
          const auto& r = sim.readings[i];
          CHECK(fmt::format("{:.{}f}", run.volume_mL[i] * per_mL, vd) ==
                fmt::format("{:.{}f}", r.volume_mL * per_mL, vd));
          CHECK(std::fabs(run.volume_mL[i] - r.volume_mL) <= 1e-9);
          CHECK(fmt::format("{:.{}f}", run.signal_values[i], sd) == fmt::format("{:.{}f}", r.signal, sd));
          CHECK(std::fabs(run.signal_values[i] - r.signal) <= 0.5 * std::pow(10.0, -sd) + 1e-12);
        }
        const bool has_temp = std::find(f.columns.begin(), f.columns.end(), "temperature") != f.columns.end();
        const bool has_time = std::find(f.columns.begin(), f.columns.end(), "time") != f.columns.end();
        CHECK(run.temperature_column.has_value() == has_temp);
        CHECK(run.time_column.has_value() == has_time);
        if (has_time) {
          REQUIRE(run.time_s.size() == sim.readings.size());
          CHECK(run.time_s.back() == close(sim.readings.back().time_s, 1e-12));
        }
        if (f.metadata != chem::MetadataStyle::none) {
          CHECK(run.facts.sample_id == "RT-7");
          REQUIRE(run.facts.sample_volume_mL.has_value());
          CHECK(*run.facts.sample_volume_mL == close(24.5, 1e-12));
          REQUIRE(run.facts.titrant_conc_mol_L.has_value());
          CHECK(*run.facts.titrant_conc_mol_L == close(0.1025, 1e-12));
          CHECK(run.facts.titrant_kind == veq::TitrantKind::base);
          REQUIRE(run.facts.temperature_C.has_value());
          CHECK(*run.facts.temperature_C == close(22.5, 1e-12));
          CHECK(run.facts.electrode.has_value() == f.write_calibration);
          if (f.write_calibration) {
            CHECK(run.facts.electrode->e0_mV == close(414.0, 1e-12));
            CHECK(run.facts.electrode->slope_mV_per_pH == close(sim.electrode_slope_mV, 0.0, 0.0005));
          }
        }
      }
    }
  }
  CHECK(combination == 18);
}

TEST_CASE("chem default options are pinned", "[chem][options]") {
  const chem::SolveOptions s;
  CHECK(s.log10_h_tolerance == 1e-12);
  CHECK(s.max_root_evaluations == 200);
  CHECK(s.activity_tolerance == 1e-15);
  CHECK(s.max_activity_iterations == 50);
  CHECK(s.warm_half_width == 0.02);
  CHECK(s.min_log10_h == -22.0);
  CHECK(s.max_log10_h == 3.0);
  CHECK(s.validate().empty());
  const chem::ModelOptions m;
  CHECK(m.temperature_C == 25.0);
  CHECK(m.activity == chem::ActivityModel::davies);
  CHECK(m.kw == chem::KwFormula::iapws_r11_07);
  CHECK_FALSE(m.davies_A.has_value());
  CHECK(m.davies_b == 0.3);
  CHECK(m.validate().empty());
  const chem::Titrant t;
  CHECK(t.kind == veq::TitrantKind::base);
  CHECK(t.conc_mol_L == 0.1);
  CHECK(t.carbonate_fraction == 0.0);
  CHECK(t.validate().empty());
  const chem::Sample sa;
  CHECK(sa.volume_mL == 25.0);
  CHECK(sa.background_ionic_strength_mol_L == 0.0);
  const chem::DosingOptions d;
  CHECK(d.mode == chem::DosingMode::constant);
  CHECK(d.start_volume_mL == 0.0);
  CHECK(d.final_volume_mL == 0.0);
  CHECK(d.step_mL == 0.1);
  CHECK(d.target_dpH == 0.1);
  CHECK(d.min_step_mL == 0.01);
  CHECK(d.max_step_mL == 0.5);
  CHECK(d.volume_resolution_mL == 0.001);
  CHECK(d.max_points == 5000);
  CHECK(d.validate().empty());
  const chem::ElectrodeOptions e;
  CHECK(e.signal == veq::SignalKind::ph);
  CHECK(e.e0_mV == 414.0);
  CHECK(e.slope_efficiency == 1.0);
  const chem::NoiseOptions n;
  CHECK(n.sd == 0.0);
  CHECK(n.drift_per_min == 0.0);
  CHECK(n.outlier_fraction == 0.0);
  CHECK(n.outlier_size == 0.5);
  CHECK(n.reading_interval_s == 10.0);
  CHECK(n.seed == 1);
  const chem::OutputFormat f;
  CHECK(f.separator == ',');
  CHECK(f.decimal == '.');
  CHECK(f.volume_unit == "mL");
  CHECK(f.metadata == chem::MetadataStyle::colon);
  CHECK(f.columns == std::vector<std::string>{"volume", "signal"});
  CHECK_FALSE(f.crlf);
  CHECK(f.validate().empty());
}

TEST_CASE("simulation options: bad values are named", "[chem][options]") {
  chem::SimulationOptions bad;
  bad.sample.analytes = {chem::analyte("acetic acid", -1.0)};
  bad.dosing.step_mL = 0.0;
  bad.titrant.carbonate_fraction = 2.0;
  const auto p = bad.validate();
  REQUIRE(p.size() == 3);
  CHECK(p[0] == "sample: analyte 1 (acetic acid): conc_mol_L = -1: must be in [0, 20]");
  CHECK(p[1] == "titrant: carbonate_fraction = 2: must be in [0, 1]");
  CHECK(p[2] == "dosing: step_mL = 0: must be at least the burette resolution 0.001");
  CHECK_THROWS_AS(chem::simulate(bad), veq::InputError);
  chem::OutputFormat clash;
  clash.decimal = ',';
  CHECK(clash.validate() == std::vector<std::string>{"decimal ',': cannot be used with the ',' separator"});
}

TEST_CASE("TOML model files: read, and errors carry line and column", "[chem][simulate][toml]") {
  const std::string good = R"(sample_id = "TOML-1"
[sample]
volume_mL = 20.0
[[sample.analyte]]
name = "KHP"
conc_mol_L = 0.05
[[sample.analyte]]
name = "my acid"
conc_mol_L = 0.01
pKa = [3.1, 6.2]
[[sample.analyte]]
kind = "strong acid"
conc_mol_L = 0.002
[titrant]
kind = "base"
conc_mol_L = 0.1
[model]
temperature_C = 20
activity = "ideal"
[dosing]
mode = "dynamic"
target_dpH = 0.2
[electrode]
signal = "mV"
e0_mV = 400
[noise]
sd = 0.2
seed = 9
[output]
separator = "semicolon"
decimal = ","
columns = ["signal", "volume"]
line_ending = "crlf"
)";
  const chem::SimulationSpec spec = chem::parse_simulation_toml(good, "good.toml");
  const chem::SimulationOptions& o = spec.simulation;
  CHECK(o.sample_id == "TOML-1");
  CHECK(o.sample.volume_mL == 20.0);
  REQUIRE(o.sample.analytes.size() == 3);
  CHECK(o.sample.analytes[0].name == "potassium hydrogen phthalate");
  CHECK(o.sample.analytes[0].added_form == 1);
  CHECK(o.sample.analytes[1].pKa_25C == std::vector<double>{3.1, 6.2});
  CHECK(o.sample.analytes[2].kind == chem::AnalyteKind::strong_acid);
  CHECK(o.model.temperature_C == 20.0);
  CHECK(o.model.activity == chem::ActivityModel::ideal);
  CHECK(o.dosing.mode == chem::DosingMode::dynamic);
  CHECK(o.electrode.signal == veq::SignalKind::mv);
  CHECK(o.electrode.e0_mV == 400.0);
  CHECK(o.noise.seed == 9u);
  CHECK(spec.output.separator == ';');
  CHECK(spec.output.decimal == ',');
  CHECK(spec.output.crlf);
  CHECK(spec.output.columns == std::vector<std::string>{"signal", "volume"});
  CHECK_NOTHROW(chem::format_run(chem::simulate(o), spec.output));

  auto error_of = [](const std::string& text) -> veq::InputError {
    try {
      (void)chem::parse_simulation_toml(text, "bad.toml");
    } catch (const veq::InputError& e) {
      return e;
    }
    FAIL("no error for:\n" << text);
    return veq::InputError({}, "");
  };
  const auto typo = error_of("[sample]\nvolume_mL = 20\nvolme_mL = 3\n");
  CHECK(typo.where().line == 3);
  CHECK(typo.where().column == 1);
  CHECK(typo.message() == "unknown key 'sample.volme_mL'");
  const auto type = error_of("[titrant]\nconc_mol_L = \"0.1\"\n");
  CHECK(type.where().line == 2);
  CHECK(type.message() == "titrant.conc_mol_L: expected a number");
  const auto choice = error_of("[model]\nactivity = \"debye\"\n");
  CHECK(choice.where().line == 2);
  CHECK(choice.message() == "model.activity: expected one of: davies, ideal");
  const auto unknown = error_of("[[sample.analyte]]\nname = \"unobtainium acid\"\nconc_mol_L = 0.1\n");
  CHECK(unknown.where().line == 1);
  const auto syntax = error_of("[sample\nvolume_mL = 1\n");
  CHECK(syntax.where().line == 1);
  CHECK(syntax.where().file == "bad.toml");
}

namespace {

struct CliResult {
  int code;
  std::string out;
  std::string err;
};

CliResult cli(std::vector<std::string> args) {
  args.insert(args.begin(), "veq");
  std::ostringstream out, err;
  const int code = veq::cli::run_cli(args, out, err);
  return {code, out.str(), err.str()};
}

fs::path scratch(const std::string& name) {
  const fs::path dir = fs::temp_directory_path() / "veq_chem_tests";
  fs::create_directories(dir);
  const fs::path p = dir / name;
  fs::remove(p);
  return p;
}

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  std::ostringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

}  // namespace

TEST_CASE("veq simulate writes a run and its truth, atomically and reproducibly", "[chem][simulate][cli]") {
  const fs::path run = scratch("acetic.csv"), truth = scratch("acetic.json");
  const std::vector<std::string> args = {"simulate",
                                         "--analyte",
                                         "acetic acid=0.1",
                                         "--noise",
                                         "0.003",
                                         "--seed",
                                         "5",
                                         "--dynamic",
                                         "0.1",
                                         "-o",
                                         run.string(),
                                         "--truth",
                                         truth.string()};
  const CliResult r = cli(args);
  INFO(r.err);
  REQUIRE(r.code == 0);
  CHECK(r.out.find("equivalence point 1: 25.0000 mL") != std::string::npos);
  const std::string first = slurp(run);
  const auto j = nlohmann::json::parse(slurp(truth));
  CHECK(j["equivalence_points"][0]["volume_mL"].get<double>() == close(25.0, 1e-14));
  // An existing file is not replaced without --force, and nothing is written then.
  const CliResult again = cli(args);
  CHECK(again.code == veq::cli::kExitUsage);
  CHECK(again.err.find("exists") != std::string::npos);
  std::vector<std::string> forced = args;
  forced.push_back("--force");
  REQUIRE(cli(forced).code == 0);
  CHECK(slurp(run) == first);  // same seed, same bytes
  // analyze finds the equivalence point the truth file names.
  const CliResult a = cli({"analyze", run.string(), "--json", "-"});
  REQUIRE(a.code == 0);
  const auto aj = nlohmann::json::parse(a.out);
  REQUIRE(aj["endpoints"].size() == 1);
  CHECK(aj["endpoints"][0]["volume_mL"].get<double>() == close(25.0, 0.0, 0.02));
  // Standard output, custom weak acid and base, ideal solution.
  const CliResult s = cli({"simulate",
                           "--weak-acid",
                           "0.02:4.2",
                           "--weak-base",
                           "0.01:9.3",
                           "--ideal",
                           "--step",
                           "0.5",
                           "--final-volume",
                           "10",
                           "--separator",
                           "tab",
                           "--decimal",
                           "comma",
                           "--metadata",
                           "none"});
  REQUIRE(s.code == 0);
  CHECK(s.out.rfind("Volume (mL)\tpH\n0,000\t", 0) == 0);
  // Usage errors say what is wrong.
  const CliResult e1 = cli({"simulate"});
  CHECK(e1.code == veq::cli::kExitUsage);
  CHECK(e1.err.find("nothing to titrate") != std::string::npos);
  const CliResult e2 = cli({"simulate", "--analyte", "acetic acid"});
  CHECK(e2.code == veq::cli::kExitUsage);
  CHECK(e2.err.find("NAME=CONC") != std::string::npos);
  const CliResult e3 = cli({"simulate", "--analyte", "vinegar=0.1"});
  CHECK(e3.code == veq::cli::kExitUsage);
  CHECK(e3.err.find("not in the analyte table") != std::string::npos);
  const CliResult e4 = cli({"simulate", "--analyte", "HCl=0.1", "--decimal", "comma"});
  CHECK(e4.code == veq::cli::kExitUsage);
  CHECK(e4.err.find("cannot be used with the ',' separator") != std::string::npos);
}
