// SPDX-License-Identifier: MIT
// The bad-input corpus: every malformed file in tests/data/bad gives its expected error (file, line, message).
#include <catch2/catch.hpp>

#include <filesystem>
#include <fstream>
#include <sstream>

#include "cli/cli.hpp"
#include "veq/ingest/reader.hpp"

namespace fs = std::filesystem;

TEST_CASE("bad-input corpus: each file fails with its expected message and line", "[ingest][bad][corpus]") {
  const fs::path dir = fs::path(VEQ_TEST_DATA) / "bad";
  std::ifstream expected(dir / "EXPECTED.tsv");
  REQUIRE(expected.good());
  std::string line;
  int checked = 0;
  while (std::getline(expected, line)) {
    if (line.empty() || line[0] == '#') continue;
    std::istringstream fields(line);
    std::string file, line_no, part;
    std::getline(fields, file, '\t');
    std::getline(fields, line_no, '\t');
    std::getline(fields, part);
    const fs::path p = dir / file;
    INFO(file);
    REQUIRE(fs::exists(p));
    try {
      (void)veq::ingest::read_run(p);
      FAIL("no error for " << file);
    } catch (const veq::InputError& e) {
      INFO(e.what());
      CHECK(e.where().file == p.string());
      CHECK(e.where().line == std::stoul(line_no));
      CHECK(e.message().find(part) != std::string::npos);
      CHECK_FALSE(e.hint().empty());
    }
    ++checked;
  }
  CHECK(checked >= 40);
  // Every file in the folder has an expectation.
  int files = 0;
  for (const auto& f : fs::directory_iterator(dir)) files += f.path().filename() != "EXPECTED.tsv";
  CHECK(files == checked);
}

TEST_CASE("bad-input corpus through the command line: exit 2, one line naming the file", "[cli][bad][corpus]") {
  const fs::path dir = fs::path(VEQ_TEST_DATA) / "bad";
  for (const auto& f : fs::directory_iterator(dir)) {
    if (f.path().filename() == "EXPECTED.tsv") continue;
    std::ostringstream out, err;
    const int code = veq::cli::run_cli({"veq", "analyze", f.path().string()}, out, err);
    INFO(f.path() << ": " << err.str());
    CHECK(code == veq::cli::kExitUsage);
    CHECK(err.str().rfind("veq: error: " + f.path().string(), 0) == 0);
    CHECK(out.str().empty());
  }
}
