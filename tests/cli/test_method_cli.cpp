// SPDX-License-Identifier: MIT
// Method files through the command line: templates, results in JSON, titer files, replicates.
#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "cli/cli.hpp"
#include "support/approx.hpp"
#include "support/charge_balance.hpp"

namespace fs = std::filesystem;

namespace {

struct Out {
  int code;
  std::string out, err;
};

Out veq_cli(std::vector<std::string> args) {
  args.insert(args.begin(), "veq");
  std::ostringstream o, e;
  const int c = veq::cli::run_cli(args, o, e);
  return {c, o.str(), e.str()};
}

fs::path dir() {
  const fs::path d = fs::temp_directory_path() / "veq_method_cli";
  fs::create_directories(d);
  return d;
}

// A KHP standardisation computed from the charge balance (pKa2 5.41, Fromm / REFERENCES §2):
// mass m g of KHP (204.22 g/mol) in 50 mL, NaOH of concentration c.
std::string khp_run(const std::string& name, double mass_g, double c) {
  veq::test::Sample s;
  s.V0_mL = 50.0;
  s.weak = {{mass_g / 204.22 / 0.050, {5.41}}};
  s.titrant = c;
  const double veq = mass_g / 204.22 * 1000.0 / c;
  std::ostringstream f;
  f << "Sample: " << name << "\nSample mass: " << mass_g << " g\nSample volume: 50 mL\nTitrant: NaOH 0.1 mol/L\n";
  f << "Volume (mL),pH\n";
  for (double v = 0.0; v <= veq * 1.3; v += 0.05) f << v << "," << veq::test::pH_at_volume(s, v) << "\n";
  const fs::path p = dir() / (name + ".csv");
  std::ofstream(p) << f.str();
  return p.string();
}

}  // namespace

TEST_CASE("veq method new writes a template that veq method check reads", "[cli][method]") {
  const fs::path p = dir() / "alk.toml";
  fs::remove(p);
  REQUIRE(veq_cli({"method", "new", "alkalinity", "-o", p.string()}).code == 0);
  const Out c = veq_cli({"method", "check", p.string()});
  CHECK(c.code == 0);
  CHECK(c.out.find("mg/L as CaCO3 from the volume where the curve crosses pH 4.5") != std::string::npos);
  CHECK(veq_cli({"method", "new", "alkalinity", "-o", p.string()}).code == veq::cli::kExitUsage);  // never overwritten
  CHECK(veq_cli({"method", "new", "colour"}).code == veq::cli::kExitUsage);
}

TEST_CASE("standardisation writes a titer file that a later method uses", "[cli][method][reference]") {
  // c = m / (M V): 0.5105 g KHP / 204.22 g/mol / V with true c = 0.0987 mol/L (REFERENCES §8 formula).
  const std::string run = khp_run("STD-1", 0.5105, 0.0987);
  const fs::path method = dir() / "std.toml";
  {
    std::ofstream m(method);
    m << "name = \"std\"\n[standard]\nname = \"KHP\"\nmolar_mass_g_mol = 204.22\n[titrant]\nname = \"NaOH\"\n"
         "[[result]]\nunit = \"mol/L titrant\"\n";
  }
  const fs::path titer = dir() / "titer.toml";
  fs::remove(titer);
  const Out o = veq_cli({"analyze", run, "--method", method.string(), "--titer-out", titer.string(), "--json", "-"});
  INFO(o.err);
  REQUIRE(o.code == 0);
  const auto j = nlohmann::json::parse(o.out);
  CHECK(j["result"]["unit"] == "mol/L titrant");
  CHECK(j["result"]["value"].get<double>() == veq::test::close(0.0987, 1e-3));
  CHECK(j["result"]["uncertainty"].get<double>() > 0);
  CHECK(j["result"]["formula"].is_string());
  CHECK(j["result"]["spec"].contains("verdict"));
  CHECK(j["result"]["budget"].size() >= 2);
  REQUIRE(fs::exists(titer));
  // A method using the titer file: the HCl assay of a 0.0937 mol/L sample (V0 20 mL).
  const fs::path assay = dir() / "assay.toml";
  {
    std::ofstream m(assay);
    m << "name = \"assay\"\n[sample]\nvolume_mL = 20\n[titrant]\ntiter_file = \"titer.toml\"\n[[result]]\nunit = "
         "\"mol/L\"\n";
  }
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.0937;
  s.titrant = 0.0987;
  std::ostringstream f;
  f << "Volume (mL),pH\n";
  for (double v = 0.0; v <= 28.0; v += 0.05) f << v << "," << veq::test::pH_at_volume(s, v) << "\n";
  const fs::path hcl = dir() / "hcl.csv";
  std::ofstream(hcl) << f.str();
  const Out a = veq_cli({"analyze", hcl.string(), "--method", assay.string(), "--json", "-"});
  INFO(a.err);
  REQUIRE(a.code == 0);
  // Stoichiometry: 0.0937 mol/L back from the standardised titrant.
  CHECK(nlohmann::json::parse(a.out)["result"]["value"].get<double>() == veq::test::close(0.0937, 2e-3));

  // A batch with the method, then the titrant restandardised (the titer file rewritten, the method file
  // not): the run is done again with the new concentration, not kept (the result scales with Ct).
  const fs::path in = dir() / "titer_batch_in", out = dir() / "titer_batch_out";
  fs::remove_all(in);
  fs::remove_all(out);
  fs::create_directories(in);
  fs::copy_file(hcl, in / "hcl.csv");
  const std::vector<std::string> batch = {"batch", in.string(), "--out", out.string(), "--method", assay.string()};
  const Out b1 = veq_cli(batch);
  INFO(b1.err);
  REQUIRE(b1.code == 0);
  CHECK(b1.out.find("processed 1, kept unchanged 0") != std::string::npos);
  CHECK(veq_cli(batch).out.find("processed 0, kept unchanged 1") != std::string::npos);
  std::stringstream text;
  text << std::ifstream(titer).rdbuf();
  std::string t = text.str();
  const std::size_t at = t.find("concentration_mol_L = ");
  REQUIRE(at != std::string::npos);
  t.replace(at, t.find('\n', at) - at, "concentration_mol_L = 0.1");
  std::ofstream(titer, std::ios::trunc) << t;
  const Out b3 = veq_cli(batch);
  INFO(b3.err);
  CHECK(b3.out.find("processed 1, kept unchanged 0") != std::string::npos);
  const auto summary = nlohmann::json::parse(std::ifstream(out / "summary.json"));
  CHECK(summary["runs"][0]["results"][0]["value"].get<double>() == veq::test::close(0.0937 * 0.1 / 0.0987, 2e-3));
}

TEST_CASE("several runs of one sample: replicate statistics", "[cli][method]") {
  const fs::path method = dir() / "std2.toml";
  {
    std::ofstream m(method);
    m << "name = \"std\"\n[standard]\nmolar_mass_g_mol = 204.22\n[[result]]\nname = \"c\"\nunit = \"mol/L titrant\"\n"
         "[acceptance]\nmax_rsd_percent = 0.2\n";
  }
  const std::string a = khp_run("REP", 0.5105, 0.0987);
  const std::string b = khp_run("REP_b", 0.4920, 0.0987);
  const std::string c = khp_run("REP_c", 0.5311, 0.0987);
  // Same sample id for all three: rename the metadata of b and c.
  for (const auto& f : {b, c}) {
    std::ifstream in(f);
    std::stringstream ss;
    ss << in.rdbuf();
    std::string t = ss.str();
    t.replace(t.find("REP_"), 5, "REP");
    std::ofstream(f) << t;
  }
  const Out o = veq_cli({"analyze", a, b, c, "--method", method.string(), "--json", "-"});
  INFO(o.err);
  REQUIRE(o.code == 0);
  const auto j = nlohmann::json::parse(o.out);
  CHECK(j["schema"] == "veq.runs/1");
  REQUIRE(j["replicates"].size() == 1);
  CHECK(j["replicates"][0]["n"] == 3);
  CHECK(j["replicates"][0]["mean"].get<double>() == veq::test::close(0.0987, 1e-3));
  CHECK(j["replicates"][0]["rsd_acceptance"] == "passed");
}

TEST_CASE("a result out of specification fails the run (exit 1); method/run conflicts are said", "[cli][method]") {
  // 0.1 mol/L HCl (20 mL) with 0.1 mol/L NaOH: 3.646 g/L HCl (36.46 g/mol; stoichiometry).
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  std::ostringstream f;
  f << "Sample: SPEC-1\nSample volume: 25 mL\nTitrant: NaOH 0.1 mol/L\nVolume (mL),pH\n";
  for (double v = 0.0; v <= 28.0; v += 0.05) f << v << "," << veq::test::pH_at_volume(s, v) << "\n";
  const fs::path run = dir() / "spec.csv";
  std::ofstream(run) << f.str();
  const fs::path m = dir() / "spec.toml";
  std::ofstream(m)
      << "name = \"spec\"\n[analyte]\nmolar_mass_g_mol = 36.46\n[sample]\nvolume_mL = 20\n"
         "[titrant]\nname = \"NaOH\"\nconcentration_mol_L = 0.1\n[[result]]\nname = \"HCl\"\nunit = \"g/L\"\n"
         "spec_high = 3.0\n";
  const Out o = veq_cli({"analyze", run.string(), "--method", m.string(), "--json", "-"});
  CHECK(o.code == veq::cli::kExitFailed);
  const auto j = nlohmann::json::parse(o.out);
  CHECK(j["result"]["spec"]["verdict"] == "fail");
  CHECK(j["result"]["value"].get<double>() == veq::test::close(3.646, 2e-3));
  // The method's 20 mL against the file's 25 mL: used, and said.
  REQUIRE(j["method_conflicts"].size() == 1);
  CHECK(j["method_conflicts"][0].get<std::string>().find("20 mL is used") != std::string::npos);
  // --sample-volume wins over the method too.
  const Out c = veq_cli({"analyze", run.string(), "--method", m.string(), "--sample-volume", "25", "--json", "-"});
  CHECK(nlohmann::json::parse(c.out)["result"]["value"].get<double>() == veq::test::close(3.646 * 20.0 / 25.0, 2e-3));
}
