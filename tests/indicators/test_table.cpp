// SPDX-License-Identifier: MIT
// The indicator table: rows against the handbook values they cite, parsing errors, lookup by name.
#include <algorithm>
#include <catch2/catch.hpp>
#include <cmath>
#include <cstdlib>
#include <string>
#include <vector>

#include "data/embedded.hpp"
#include "veq/core/error.hpp"
#include "veq/indicators/table.hpp"

using veq::indicators::IndicatorTable;

namespace {

struct HandbookRow {
  const char* name;
  double low_pH;
  double high_pH;
  const char* acid_colour;
  const char* base_colour;
};

// Transition ranges and colours from Wikipedia, "pH indicator", table of common laboratory indicators
// (as mirrored by chemeurope.com, "pH indicator"), and REFERENCES §1, which cites it; where the two
// editions differ the value of REFERENCES §1 is used (methyl violet 0.0-1.6, phenol red 6.8-8.4).
// Colour names as REFERENCES §1 gives them ("acid -> base").
const HandbookRow kWikipedia[] = {
    {"Methyl violet", 0.0, 1.6, "yellow", "blue-violet"},
    {"Thymol blue (acid range)", 1.2, 2.8, "red", "yellow"},
    {"Methyl yellow", 2.9, 4.0, "red", "yellow"},
    {"Bromophenol blue", 3.0, 4.6, "yellow", "blue-violet"},
    {"Methyl orange", 3.1, 4.4, "red", "yellow-orange"},
    {"Bromocresol green", 3.8, 5.4, "yellow", "blue"},
    {"Methyl red", 4.4, 6.2, "red", "yellow"},
    {"Bromocresol purple", 5.2, 6.8, "yellow", "purple"},
    {"Bromothymol blue", 6.0, 7.6, "yellow", "blue"},
    {"Phenol red", 6.8, 8.4, "yellow", "red"},
    {"Neutral red", 6.8, 8.0, "red", "yellow"},
    {"Thymol blue (alkaline range)", 8.0, 9.6, "yellow", "blue"},
    {"Phenolphthalein", 8.2, 10.0, "colourless", "pink"},
    {"Thymolphthalein", 9.4, 10.6, "colourless", "blue"},
    {"Alizarin yellow R", 10.1, 12.0, "yellow", "red"},
    {"Indigo carmine", 11.4, 13.0, "blue", "yellow"},
};

// Rows the Wikipedia table does not carry. Chlorophenol red 4.8-6.4 yellow -> red, m-cresol purple
// (alkaline) 7.4-9.0 yellow -> purple: REFERENCES §1 (its confidence M). Cresol red (alkaline) 7.2-8.8
// yellow -> reddish-purple: REFERENCES §1 and W. M. Clark, The Determination of Hydrogen Ions (colour
// chart: yellow at pH 7.2 to deep pink at 8.8). The acid ranges of cresol red (0.2-1.8) and m-cresol
// purple (1.2-2.8), red -> yellow: from memory.
const HandbookRow kOther[] = {
    {"Chlorophenol red", 4.8, 6.4, "yellow", "red"},
    {"m-Cresol purple (alkaline range)", 7.4, 9.0, "yellow", "purple"},
    {"Cresol red (alkaline range)", 7.2, 8.8, "yellow", "reddish-purple"},
    {"Cresol red (acid range)", 0.2, 1.8, "red", "yellow"},
    {"m-Cresol purple (acid range)", 1.2, 2.8, "red", "yellow"},
};

void check_row(const HandbookRow& h) {
  INFO(h.name);
  const auto& row = IndicatorTable::builtin().find(h.name);
  CHECK(row.name == h.name);
  // The table copies these values: they must agree to the 0.1 pH they are printed with.
  CHECK(row.low_pH == Approx(h.low_pH).margin(0.001));
  CHECK(row.high_pH == Approx(h.high_pH).margin(0.001));
  CHECK(row.acid_colour.name == h.acid_colour);
  CHECK(row.base_colour.name == h.base_colour);
}

int hex_component(const std::string& hex, int i) {
  return std::stoi(hex.substr(1 + 2 * i, 2), nullptr, 16);
}

}  // namespace

TEST_CASE("indicator table rows agree with the handbook values they cite", "[indicators][table][reference]") {
  for (const auto& h : kWikipedia) check_row(h);
  for (const auto& h : kOther) check_row(h);
  // Every row of the table is one of the checked rows above.
  CHECK(IndicatorTable::builtin().rows().size() == std::size(kWikipedia) + std::size(kOther));
}

TEST_CASE("indicator table: at least 15 indicators, each row sourced, two-range indicators as two rows",
          "[indicators][table]") {
  const auto& rows = IndicatorTable::builtin().rows();
  CHECK(rows.size() >= 15);
  for (const auto& r : rows) {
    INFO(r.name);
    CHECK_FALSE(r.source.empty());
    // Each row names a published source or says that it is from memory.
    const bool cited = r.source.find("Wikipedia") != std::string::npos || r.source.find("Clark") != std::string::npos ||
                       r.source.find("from memory") != std::string::npos;
    CHECK(cited);
    CHECK(r.low_pH < r.high_pH);
  }
  // Thymol blue, cresol red and m-cresol purple each change colour twice (REFERENCES §1, "1st"/"2nd"
  // rows; Wikipedia, "pH indicator", "first/second transition"): two rows, the acid range below the
  // alkaline one.
  for (const char* base : {"Thymol blue", "Cresol red", "m-Cresol purple"}) {
    INFO(base);
    const auto& acid = IndicatorTable::builtin().find(std::string(base) + " (acid range)");
    const auto& alkaline = IndicatorTable::builtin().find(std::string(base) + " (alkaline range)");
    CHECK(acid.high_pH < alkaline.low_pH);
  }
}

TEST_CASE("indicator colours are sRGB values that look like their names", "[indicators][table]") {
  // Plain colour naming (common practice, no source): yellow has strong red and green and little blue;
  // red and pink lead with red; blue leads with blue; purple and violet have more red and blue than green;
  // colourless is shown as white.
  for (const auto& r : IndicatorTable::builtin().rows()) {
    for (const auto* c : {&r.acid_colour, &r.base_colour}) {
      INFO(r.name << ": " << c->name << " " << c->srgb_hex);
      REQUIRE(c->srgb_hex.size() == 7);
      const int red = hex_component(c->srgb_hex, 0), green = hex_component(c->srgb_hex, 1),
                blue = hex_component(c->srgb_hex, 2);
      if (c->name == "yellow") CHECK((red > 200 && green > 180 && blue < 100));
      if (c->name == "red") CHECK((red > green + 80 && red > blue + 60));
      if (c->name == "pink") CHECK((red > 200 && blue > green));
      if (c->name == "blue") CHECK((blue > red + 60 && blue > green));
      if (c->name == "purple" || c->name == "blue-violet" || c->name == "reddish-purple") {
        CHECK((red > green && blue > green));
      }
      if (c->name == "yellow-orange") CHECK((red > 200 && green > 120 && green < red && blue < 100));
      if (c->name == "colourless") CHECK(c->srgb_hex == "#FFFFFF");
    }
  }
}

TEST_CASE("the indicator table is embedded at build time", "[indicators][table][data]") {
  const auto text = veq::data::embedded("indicators.tsv");
  REQUIRE(text.has_value());
  CHECK(text->find("Phenolphthalein") != std::string_view::npos);
  CHECK_FALSE(veq::data::embedded("no-such-table.tsv").has_value());
}

TEST_CASE("indicator lookup ignores case, spaces and punctuation, takes aliases and unique prefixes",
          "[indicators][table]") {
  const auto& t = IndicatorTable::builtin();
  CHECK(t.find("phenolphthalein").name == "Phenolphthalein");
  CHECK(t.find("PHENOL-PHTHALEIN").name == "Phenolphthalein");
  CHECK(t.find("bromthymol blue").name == "Bromothymol blue");
  // Standard Methods 2320 B names "metacresol purple" for the pH 8.3 endpoint: the alkaline range.
  CHECK(t.find("metacresol purple").name == "m-Cresol purple (alkaline range)");
  CHECK(t.find("thymol blue 2").name == "Thymol blue (alkaline range)");
  CHECK(t.find("methyl ora").name == "Methyl orange");
}

TEST_CASE("an unknown or ambiguous indicator name is an InputError naming the close matches", "[indicators][table]") {
  const auto& t = IndicatorTable::builtin();
  try {
    (void)t.find("phenolphtalein");
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.where().file == "--indicator");
    CHECK(e.message().find("'phenolphtalein' is not in the indicator table") != std::string::npos);
    CHECK(e.message().find("close matches: Phenolphthalein") != std::string::npos);
    CHECK(e.hint().find("veq indicators") != std::string::npos);
  }
  try {
    (void)t.find("thymol blue");
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.message().find("Thymol blue (acid range)") != std::string::npos);
    CHECK(e.message().find("Thymol blue (alkaline range)") != std::string::npos);
  }
  try {
    (void)t.find("zzzz");
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.message() == "'zzzz' is not in the indicator table");
  }
  CHECK_THROWS_AS(t.find(""), veq::InputError);
}

TEST_CASE("indicators bracketing a pH are ranked by how close their midpoint lies", "[indicators][table]") {
  // Acetic acid with NaOH ends near pH 8.7: phenolphthalein and thymol blue (2nd) are the textbook choice
  // (REFERENCES §1, "Choice"); methyl orange (3.1-4.4) is not among them.
  const auto rows = IndicatorTable::builtin().bracketing(8.7);
  REQUIRE(rows.size() >= 2);
  std::vector<std::string> names;
  for (const auto* r : rows) names.push_back(r->name);
  CHECK(std::find(names.begin(), names.end(), "Phenolphthalein") != names.end());
  CHECK(std::find(names.begin(), names.end(), "Methyl orange") == names.end());
  for (std::size_t i = 1; i < rows.size(); ++i) {
    CHECK(std::fabs(rows[i - 1]->midpoint_pH() - 8.7) <= std::fabs(rows[i]->midpoint_pH() - 8.7));
  }
  CHECK(IndicatorTable::builtin().bracketing(14.5).empty());
}

TEST_CASE("a broken indicator table is an InputError with line and column", "[indicators][table]") {
  const std::string header =
      "# comment\nname\taliases\tlow_pH\thigh_pH\tpK_In\tacid_colour\tacid_sRGB\tbase_colour\tbase_sRGB\tsource\n";
  const std::string good = "Test red\t\t4.0\t5.6\t4.8\tyellow\t#EEDD33\tred\t#CC2233\tinvented for the test\n";
  CHECK(IndicatorTable::parse(header + good, "t.tsv").rows().size() == 1);
  const auto error_at = [&](const std::string& row) -> veq::SourceLocation {
    try {
      (void)IndicatorTable::parse(header + row, "t.tsv");
    } catch (const veq::InputError& e) {
      return e.where();
    }
    return {};
  };
  // Column numbers count characters from 1, tabs included.
  auto w = error_at("Test red\t\t4,0\t5.6\t4.8\tyellow\t#EEDD33\tred\t#CC2233\tx\n");
  CHECK(w.file == "t.tsv");
  CHECK(w.line == 3);
  CHECK(w.column == 11);
  CHECK(error_at("Test red\t\t5.6\t4.0\t4.8\tyellow\t#EEDD33\tred\t#CC2233\tx\n").line == 3);
  CHECK(error_at("Test red\t\t4.0\t5.6\t4.8\tyellow\tEEDD33\tred\t#CC2233\tx\n").column == 30);
  CHECK(error_at("Test red\t\t4.0\t5.6\t4.8\tyellow\t#EEDD33\tred\t#CC2233\t\n").line == 3);
  CHECK(error_at(good + "test RED\t\t4.0\t5.6\t4.8\tyellow\t#EEDD33\tred\t#CC2233\tx\n").line == 4);
  CHECK(error_at("Test red\t4.0\t5.6\n").line == 3);
  CHECK_THROWS_AS(IndicatorTable::parse("name\tsource\n", "t.tsv"), veq::InputError);
  CHECK_THROWS_AS(IndicatorTable::parse(header, "t.tsv"), veq::InputError);
}
