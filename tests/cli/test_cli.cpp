// SPDX-License-Identifier: MIT
// The veq command line: exit codes, error format, JSON output (schema veq.run/1).
#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <nlohmann/json.hpp>
#include <sstream>

#include "cli/cli.hpp"

namespace fs = std::filesystem;

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

fs::path scratch(const std::string& name) {
  const fs::path dir = fs::temp_directory_path() / "veq_cli_tests";
  fs::create_directories(dir);
  return dir / name;
}

std::string write(const std::string& name, const std::string& text) {
  const fs::path p = scratch(name);
  std::ofstream(p, std::ios::binary) << text;
  return p.string();
}

// 0.1 mol/L HCl (20 mL) with 0.1 mol/L NaOH, readings every 0.5 mL; the charge balance puts the
// equivalence at 20.00 mL (stoichiometry). Values rounded from tests/support/charge_balance.hpp.
const char* kRun =
    "Sample: CLI-1\nSample volume: 20 mL\nTitrant: NaOH 0.1 mol/L\n"
    "Volume (mL);pH\n0;1.00\n2;1.09\n4;1.18\n6;1.27\n8;1.37\n10;1.48\n12;1.60\n14;1.75\n16;1.95\n"
    "17;2.08\n18;2.28\n19;2.59\n19.5;2.90\n20;7.00\n20.5;11.09\n21;11.39\n22;11.68\n24;11.96\n26;12.12\n";

}  // namespace

TEST_CASE("analyze prints the endpoint and exits 0", "[cli]") {
  const Result r = run({"analyze", write("ok.csv", kRun)});
  INFO(r.err);
  CHECK(r.code == veq::cli::kExitOk);
  CHECK(r.out.find("Run CLI-1") != std::string::npos);
  CHECK((r.out.find("Endpoint 1: 20.0") != std::string::npos || r.out.find("Endpoint 1: 19.9") != std::string::npos));
}

TEST_CASE("analyze --json - writes schema veq.run/1 with the documented fields", "[cli]") {
  const Result r = run({"analyze", write("ok2.csv", kRun), "--json", "-", "--temperature", "22"});
  REQUIRE(r.code == 0);
  const auto j = nlohmann::json::parse(r.out);
  CHECK(j["schema"] == "veq.run/1");
  CHECK(j["run"]["id"] == "CLI-1");
  CHECK(j["run"]["points"] == 19);
  CHECK(j["run"]["signal"] == "pH");
  CHECK(j["run"]["metadata"]["Sample volume"] == "20 mL");
  CHECK(j["run"]["facts"]["temperature_C"] == 22.0);  // the command line wins
  REQUIRE(j["endpoints"].size() == 1);
  const auto& e = j["endpoints"][0];
  CHECK(e["index"] == 1);
  // Stoichiometry: 0.1 mol/L x 20 mL / 0.1 mol/L = 20.00 mL; readings 0.5 mL apart.
  CHECK(std::fabs(e["volume_mL"].get<double>() - 20.0) <= 0.25);
  CHECK(e["uncertainty_mL"].get<double>() > 0.0);
  CHECK(e.contains("pH"));
  CHECK(e["methods"]["first_derivative"].contains("volume_mL"));
  CHECK(e["methods"]["second_derivative"].contains("volume_mL"));
  CHECK(e["flags"].is_array());
  CHECK(j["warnings"].is_array());
}

TEST_CASE("the same input gives byte-identical JSON", "[cli]") {
  const std::string f = write("same.csv", kRun);
  CHECK(run({"analyze", f, "--json", "-"}).out == run({"analyze", f, "--json", "-"}).out);
}

TEST_CASE("analyze --json FILE never replaces an existing file without --force", "[cli]") {
  const std::string f = write("keep.csv", kRun);
  const fs::path out = scratch("keep.json");
  fs::remove(out);
  REQUIRE(run({"analyze", f, "--json", out.string(), "-q"}).code == 0);
  std::ofstream(out) << "precious";
  const Result again = run({"analyze", f, "--json", out.string(), "-q"});
  CHECK(again.code == veq::cli::kExitUsage);
  CHECK(again.err.find("already exists") != std::string::npos);
  std::ifstream in(out);
  std::string kept((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  CHECK(kept == "precious");
  CHECK(run({"analyze", f, "--json", out.string(), "-q", "--force"}).code == 0);
}

TEST_CASE("a bad file: exit 2, file:line:col message and a hint", "[cli]") {
  const std::string f = write("bad.csv", "Volume (mL);pH\n0;3.1\n1;abc\n2;8.7\n");
  const Result r = run({"analyze", f});
  CHECK(r.code == veq::cli::kExitUsage);
  CHECK(r.err.find("veq: error: " + f + ":3:3: 'abc'") != std::string::npos);
  CHECK(r.err.find("hint:") != std::string::npos);
  CHECK(r.out.empty());
}

TEST_CASE("usage errors exit 2; --help explains every option and exits 0", "[cli]") {
  CHECK(run({}).code == veq::cli::kExitUsage);
  CHECK(run({"analyze"}).code == veq::cli::kExitUsage);
  CHECK(run({"analyze", "x.csv", "--titrant", "water"}).code == veq::cli::kExitUsage);
  const Result h = run({"analyze", "--help"});
  CHECK(h.code == 0);
  for (const char* opt : {"--json",
                          "--sample-volume",
                          "--titrant-conc",
                          "--titrant",
                          "--temperature",
                          "--columns",
                          "--volume-unit",
                          "--sort",
                          "--e0",
                          "--buffers",
                          "--window"}) {
    CHECK(h.out.find(opt) != std::string::npos);
  }
}

TEST_CASE("a run without an endpoint exits 1 and says why", "[cli]") {
  const std::string f = write("flat.csv", "Volume (mL);pH\n0;3.10\n1;3.11\n2;3.12\n3;3.13\n4;3.14\n5;3.15\n6;3.16\n");
  const Result r = run({"analyze", f});
  CHECK(r.code == veq::cli::kExitFailed);
  CHECK(r.out.find("No endpoint found") != std::string::npos);
}

TEST_CASE("every sample run gives at least one endpoint", "[cli][samples]") {
  int runs = 0;
  for (const auto& entry : fs::directory_iterator(VEQ_SAMPLE_RUNS)) {
    const auto ext = entry.path().extension();
    if (ext != ".csv" && ext != ".txt" && ext != ".tsv") continue;
    ++runs;
    const Result r = run({"analyze", entry.path().string(), "--json", "-"});
    INFO(entry.path() << "\n" << r.err);
    CHECK(r.code == 0);
    CHECK_FALSE(nlohmann::json::parse(r.out)["endpoints"].empty());
  }
  CHECK(runs >= 5);
}

TEST_CASE("command words and numbers: unknown command named, British spelling, plain number messages", "[cli]") {
  const Result unknown = run({"analyz", "x.csv"});
  CHECK(unknown.code == veq::cli::kExitUsage);
  CHECK(unknown.err.find("'analyz' is not a veq command") != std::string::npos);
  CHECK(unknown.err.find("analyze") != std::string::npos);
  const Result british = run({"analyse", write("uk.csv", kRun), "-q"});
  INFO(british.err);
  CHECK(british.code == veq::cli::kExitOk);
  const Result word = run({"analyze", write("n1.csv", kRun), "--sample-volume", "abc"});
  CHECK(word.code == veq::cli::kExitUsage);
  CHECK(word.err.find("--sample-volume: 'abc' is not a number") != std::string::npos);
  const Result zero = run({"analyze", write("n2.csv", kRun), "--titrant-conc", "0"});
  CHECK(zero.code == veq::cli::kExitUsage);
  CHECK(zero.err.find("'0' must be a positive number") != std::string::npos);
}
