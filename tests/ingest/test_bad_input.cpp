// SPDX-License-Identifier: MIT
// Every bad input gets an InputError naming file, line (and column) and what was expected.
#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>
#include <string>

#include "veq/ingest/reader.hpp"

using veq::InputError;
using veq::ingest::parse_run;

namespace {

struct Expect {
  std::size_t line;
  std::size_t column;  // 0: not checked
  std::string text;    // part of the message
};

void expect_error(const std::string& bytes, const Expect& e, const veq::ingest::IngestOptions& o = {}) {
  try {
    (void)parse_run(bytes, "bad.csv", o);
    FAIL("no error for: " << bytes.substr(0, 60));
  } catch (const InputError& err) {
    INFO(err.what());
    CHECK(err.where().file == "bad.csv");
    CHECK(err.where().line == e.line);
    if (e.column > 0) CHECK(err.where().column == e.column);
    CHECK(err.message().find(e.text) != std::string::npos);
    CHECK(std::string(err.what()).rfind("bad.csv:", 0) == 0);
  }
}

}  // namespace

TEST_CASE("empty file", "[ingest][bad]") {
  expect_error("", {0, 0, "empty"});
  expect_error("\n\n   \n", {1, 0, "empty"});
}

TEST_CASE("binary file", "[ingest][bad]") {
  std::string bin("\x89PNG\r\n\x1a\n\0\0\0\rIHDR\0\0\x01\0", 20);
  expect_error(bin, {1, 0, "binary"});
}

TEST_CASE("no numeric rows", "[ingest][bad]") {
  expect_error("Titration report\nnothing was recorded\n", {1, 0, "no table of numbers"});
  // Under a recognisable header, the first cell that is not a number is named.
  expect_error("Volume (mL);pH\nabc;def\nghi;jkl\n", {2, 1, "'abc' in column 'Volume (mL)' is not a number"});
}

TEST_CASE("a single column", "[ingest][bad]") {
  expect_error("pH\n3.12\n4.75\n8.71\n", {2, 1, "single column"});
}

TEST_CASE("unknown units", "[ingest][bad]") {
  expect_error("Volume (gal);pH\n0;3.12\n1;4.75\n2;8.71\n", {1, 1, "unknown volume unit 'gal'"});
  expect_error("Volume (mL);E (furlongs)\n0;3.12\n1;4.75\n2;8.71\n", {1, 2, "unknown unit 'furlongs'"});
}

TEST_CASE("a non-numeric cell inside the table", "[ingest][bad]") {
  expect_error("Volume (mL);pH\n0.00;3.12\n12.50;abc\n25.00;8.71\n", {3, 7, "'abc' in column 'pH' is not a number"});
  expect_error("Volume (mL);pH\n0.00;3.12\nx;4.1\n25.00;8.71\n", {3, 1, "'x' in column 'Volume (mL)'"});
}

TEST_CASE("NaN and infinity", "[ingest][bad]") {
  expect_error("Volume (mL),pH\n0.00,3.12\n12.50,nan\n25.00,8.71\n", {3, 7, "not a finite number"});
  expect_error("Volume (mL),pH\n0.00,3.12\ninf,4.75\n25.00,8.71\n", {3, 1, "not a finite number"});
  expect_error("Volume (mL),pH\n0.00,3.12\n1e400,4.75\n25.00,8.71\n", {3, 1, "not a finite number"});
}

TEST_CASE("negative volume", "[ingest][bad]") {
  expect_error("Volume (mL),pH\n0.00,3.12\n-0.50,4.75\n25.00,8.71\n", {3, 1, "negative volume"});
}

TEST_CASE("volume going backwards, unless --sort", "[ingest][bad]") {
  expect_error("Volume (mL),pH\n0.00,3.12\n12.50,4.75\n11.00,8.71\n", {4, 1, "volume goes backwards"});
  veq::ingest::IngestOptions o;
  o.sort_by_volume = true;
  CHECK_NOTHROW(parse_run("Volume (mL),pH\n0.00,3.12\n12.50,4.75\n11.00,8.71\n", "ok.csv", o));
}

TEST_CASE("all volumes equal", "[ingest][bad]") {
  expect_error("Volume (mL),pH\n5.00,3.12\n5.00,4.75\n5.00,8.71\n", {2, 0, "same volume"});
}

TEST_CASE("pH outside -2..16 and mV outside ±2000", "[ingest][bad]") {
  expect_error("Volume (mL),pH\n0.00,3.12\n12.50,17.5\n25.00,8.71\n", {3, 7, "pH 17.5 is outside -2 to 16"});
  expect_error("Volume (mL),pH\n0.00,-2.5\n12.50,4.75\n25.00,8.71\n", {2, 6, "outside"});
  expect_error("Volume (mL),E (mV)\n0.00,120\n12.50,2500\n25.00,-80\n", {3, 7, "potential 2500 mV is outside"});
  expect_error("Volume (mL),E (V)\n0.00,0.12\n12.50,2.5\n25.00,-0.08\n", {3, 7, "outside"});
}

TEST_CASE("file over the size limit", "[ingest][bad]") {
  veq::ingest::IngestOptions o;
  o.max_file_bytes = 1000;
  std::string big = "Volume (mL),pH\n";
  for (int i = 0; i < 200; ++i) big += std::to_string(i) + ".00,7.00\n";
  expect_error(big, {0, 0, "limit"}, o);
  // From disk: refused before reading.
  const auto path = std::filesystem::temp_directory_path() / "veq_test_big.csv";
  std::ofstream(path) << big;
  try {
    (void)veq::ingest::read_run(path, o);
    FAIL("no error");
  } catch (const InputError& e) {
    CHECK(std::string(e.message()).find("limit") != std::string::npos);
    CHECK(e.where().file == path.string());
  }
  std::filesystem::remove(path);
}

TEST_CASE("a line over the line-length limit", "[ingest][bad]") {
  veq::ingest::IngestOptions o;
  o.max_line_bytes = 100;
  expect_error("Volume (mL),pH\n0.00,3.12\n" + std::string(200, '7') + "\n", {3, 0, "bytes long"}, o);
}

TEST_CASE("a missing file and a folder", "[ingest][bad]") {
  CHECK_THROWS_WITH(veq::ingest::read_run("/nonexistent/veq/run.csv"), Catch::Contains("does not exist"));
  CHECK_THROWS_WITH(veq::ingest::read_run(std::filesystem::temp_directory_path()), Catch::Contains("folder"));
}

TEST_CASE("a header without a volume or a signal column", "[ingest][bad]") {
  expect_error("Time (s);pH\n0;3.12\n1;4.75\n2;8.71\n", {1, 0, "no volume column"});
  expect_error("Volume (mL);Conductivity\n0;3.12\n1;4.75\n2;8.71\n", {1, 0, "no pH or potential"});
  expect_error("1;0;3.12\n2;1;4.75\n3;2;8.71\n", {1, 0, "no header row"});
}

TEST_CASE("a short row inside the table", "[ingest][bad]") {
  expect_error("Volume (mL);pH\n0.00;3.12\n12.50\n25.00;8.71\n", {3, 1, "inside the table"});
}

TEST_CASE("two runs in one file: an error at the second run's first reading, with or without --sort", "[ingest][bad]") {
  // A titrator export appended to another: the header again, then the volume back at the start. Sorting
  // would interleave two samples into one curve (common practice: one run per file, no source).
  const std::string text =
      "Volume (mL),pH\n0.0,3.1\n5.0,4.2\n10.0,4.8\n15.0,5.5\n20.0,9.1\n25.0,11.2\n"
      "Volume (mL),pH\n0.0,3.0\n5.0,4.1\n";
  for (const bool sort : {false, true}) {
    CAPTURE(sort);
    veq::ingest::IngestOptions o;
    o.sort_by_volume = sort;
    try {
      (void)veq::ingest::parse_run(text, "two.csv", o);
      FAIL("no error");
    } catch (const veq::InputError& e) {
      CHECK(e.where().line == 9);
      CHECK(std::string(e.what()).find("second run") != std::string::npos);
    }
  }
}
