// SPDX-License-Identifier: MIT
// Listing a batch folder, shards that partition it, output names that stay inside the output folder.
#include <fmt/format.h>

#include <catch2/catch.hpp>
#include <set>

#include "support/files.hpp"
#include "veq/batch/listing.hpp"
#include "veq/core/atomic_file.hpp"

namespace fs = std::filesystem;
using veq::batch::Shard;

TEST_CASE("hash64 is XXH3-64 with seed 0", "[batch][listing][reference]") {
  // XXH3_64bits("hello") = -7685981735718036227 as a signed 64-bit integer: StarRocks SQL reference,
  // function xx_hash3_64, example "select xx_hash3_64('hello')".
  CHECK(static_cast<std::int64_t>(veq::batch::hash64("hello")) == -7685981735718036227LL);
  // XXH3_64bits of empty input: 0x2D06800538D394C2 (xxHash's sanity-check vectors; from memory).
  CHECK(veq::batch::hash_hex(veq::batch::hash64("")) == "2d06800538d394c2");
}

TEST_CASE("shard spec I/N is parsed strictly", "[batch][listing]") {
  const Shard s = veq::batch::parse_shard("2/5");
  CHECK(s.index == 2);
  CHECK(s.count == 5);
  for (const char* bad : {"", "2", "0/3", "4/3", "a/b", "1/0", "1/3x", "-1/3", "1/1000000", "1//3"}) {
    INFO(bad);
    CHECK_THROWS_AS(veq::batch::parse_shard(bad), veq::InputError);
  }
}

TEST_CASE("shards partition the runs: no overlap, union is everything", "[batch][listing]") {
  std::vector<std::string> names;
  for (int i = 0; i < 2000; ++i) names.push_back(fmt::format("plant{}/line {}/run_{:04d}.csv", i % 7, i % 3, i));
  for (unsigned n : {1u, 2u, 3u, 7u, 16u}) {
    std::vector<int> owners(names.size(), 0);
    for (unsigned k = 1; k <= n; ++k) {
      std::size_t in = 0;
      for (std::size_t i = 0; i < names.size(); ++i) {
        if (veq::batch::in_shard(names[i], {k, n})) ++owners[i], ++in;
      }
      // A hash split is balanced to within a few standard deviations of a binomial count.
      const double expect = static_cast<double>(names.size()) / n;
      CHECK(std::fabs(static_cast<double>(in) - expect) <= 5.0 * std::sqrt(expect) + 1.0);
    }
    for (int o : owners) CHECK(o == 1);
  }
}

TEST_CASE("output stems are safe, unique and stable", "[batch][listing]") {
  using veq::batch::output_stem;
  for (const char* rel : {"../../etc/passwd",
                          "a/../../b.csv",
                          "/abs/path.csv",
                          ".hidden.csv",
                          "-rf.csv",
                          "con.csv",
                          "a\\b.csv",
                          "name with spaces & <tags>.csv",
                          "\xC3\xA9t\xC3\xA9.csv",
                          ""}) {
    const std::string s = output_stem(rel);
    INFO(rel << " -> " << s);
    CHECK(s.find('/') == std::string::npos);
    CHECK(s.find('\\') == std::string::npos);
    CHECK(s.front() != '.');
    CHECK(s.front() != '-');
    CHECK(s.size() <= 80 + 17);
    for (const char c : s) CHECK((std::isalnum(static_cast<unsigned char>(c)) || c == '.' || c == '_' || c == '-'));
    CHECK(output_stem(rel) == s);
  }
  // Paths that sanitise alike still get different names.
  CHECK(output_stem("a b.csv") != output_stem("a_b.csv"));
  CHECK(output_stem("x/y.csv") != output_stem("x_y.csv"));
  CHECK(output_stem(std::string(300, 'a') + "1") != output_stem(std::string(300, 'a') + "2"));
  CHECK(output_stem("run A.csv").rfind("run_A.csv-", 0) == 0);
}

TEST_CASE("list_runs: patterns, hidden and temporary files, subfolders, sorted", "[batch][listing]") {
  const fs::path d = veq::test::fresh_dir("listing");
  for (const char* f : {"b.csv",
                        "a.CSV",
                        "c.txt",
                        "d.tsv",
                        "notes.md",
                        ".hidden.csv",
                        "sub/e.csv",
                        "sub/deep/f.csv",
                        ".git/g.csv",
                        "out/h.csv"}) {
    veq::test::write_file(d / f, "x");
  }
  veq::test::write_file(d / ("z.csv" + std::string(veq::io::kTemporaryMarker) + "1-2"), "x");
  fs::create_directories(d / "folder.csv");
  auto flat = veq::batch::list_runs(d);
  CHECK(flat.files == std::vector<std::string>{"a.CSV", "b.csv", "c.txt", "d.tsv"});
  veq::batch::ListOptions o;
  o.recursive = true;
  o.exclude = d / "out";
  CHECK(veq::batch::list_runs(d, o).files ==
        std::vector<std::string>{"a.CSV", "b.csv", "c.txt", "d.tsv", "sub/deep/f.csv", "sub/e.csv"});
  o.patterns = {"sub/*.csv"};
  CHECK(veq::batch::list_runs(d, o).files == std::vector<std::string>{"sub/e.csv"});
  o.patterns = {"*.md"};
  o.recursive = false;
  CHECK(veq::batch::list_runs(d, o).files == std::vector<std::string>{"notes.md"});
  // Shards of the listing: disjoint, and together the whole.
  o.patterns = {"*"};
  o.recursive = true;
  std::set<std::string> all, parts;
  for (const auto& f : veq::batch::list_runs(d, o).files) all.insert(f);
  for (unsigned k = 1; k <= 3; ++k) {
    o.shard = {k, 3};
    for (const auto& f : veq::batch::list_runs(d, o).files) CHECK(parts.insert(f).second);
  }
  CHECK(parts == all);
}

TEST_CASE("list_runs: a missing folder or a file is an InputError naming it", "[batch][listing]") {
  const fs::path d = veq::test::fresh_dir("listing_bad");
  try {
    (void)veq::batch::list_runs(d / "nope");
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.where().file == (d / "nope").string());
    CHECK(e.message().find("does not exist") != std::string::npos);
  }
  veq::test::write_file(d / "f.csv", "x");
  CHECK_THROWS_AS(veq::batch::list_runs(d / "f.csv"), veq::InputError);
  veq::batch::ListOptions o;
  o.patterns.clear();
  CHECK_THROWS_AS(veq::batch::list_runs(d, o), veq::InputError);
}
