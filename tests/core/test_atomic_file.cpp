// SPDX-License-Identifier: MIT
// Atomic output: all or nothing, never a silent overwrite.
#include <unistd.h>

#include <catch2/catch.hpp>
#include <filesystem>
#include <fstream>

#include "veq/core/atomic_file.hpp"
#include "veq/core/error.hpp"

namespace fs = std::filesystem;

namespace {
std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}
fs::path fresh_dir() {
  // One folder per test process: CTest runs the cases of this file in parallel.
  const fs::path d = fs::temp_directory_path() / ("veq_atomic_tests_" + std::to_string(::getpid()));
  fs::remove_all(d);
  fs::create_directories(d);
  return d;
}
}  // namespace

TEST_CASE("an exception mid-write leaves the old file untouched and no temporary behind", "[core][atomic]") {
  const fs::path dir = fresh_dir();
  const fs::path target = dir / "result.json";
  std::ofstream(target) << "old";
  try {
    veq::io::AtomicFile f(target, true);
    f.write("new, half");
    throw std::runtime_error("interrupted");
  } catch (const std::runtime_error&) {
  }
  CHECK(slurp(target) == "old");
  CHECK(std::distance(fs::directory_iterator(dir), fs::directory_iterator()) == 1);
}

TEST_CASE("commit replaces only when allowed", "[core][atomic]") {
  const fs::path dir = fresh_dir();
  const fs::path target = dir / "r.txt";
  veq::io::write_file_atomically(target, "first", false);
  CHECK(slurp(target) == "first");
  CHECK_THROWS_AS(veq::io::write_file_atomically(target, "second", false), veq::InputError);
  CHECK(slurp(target) == "first");
  veq::io::write_file_atomically(target, "third", true);
  CHECK(slurp(target) == "third");
  CHECK(std::distance(fs::directory_iterator(dir), fs::directory_iterator()) == 1);
}

TEST_CASE("a folder that cannot be written gives an InputError naming the target", "[core][atomic]") {
  try {
    veq::io::write_file_atomically("/nonexistent-veq-dir/out.json", "x", false);
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.where().file == "/nonexistent-veq-dir/out.json");
    CHECK(e.message().find("cannot write") != std::string::npos);
  }
}
