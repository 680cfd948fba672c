// SPDX-License-Identifier: MIT
// The embedded analyte table: lookups, and every value against its published source.
#include <catch2/catch.hpp>

#include "support/approx.hpp"
#include "veq/chem/analytes.hpp"

using veq::test::close;
namespace chem = veq::chem;

TEST_CASE("analyte table holds the published pKa values at 25 °C", "[chem][analytes]") {
  struct Row {
    const char* name;
    std::vector<double> pKa;
    double tol;
  };
  // Values and sources as in REFERENCES §2 (CRC-org / CRC-inorg = CRC Handbook dissociation constants of
  // organic acids / inorganic acids and bases; Fromm = J. R. Fromm, "Ionization constants of aqueous
  // polyprotic acids"; Sydney = University of Sydney first-year chemistry table). The tolerance is the
  // spread REFERENCES gives between sources.
  const Row rows[] = {
      {"acetic acid", {4.756}, 0.005},                    // CRC-org 4.756; Sydney 4.76
      {"formic acid", {3.75}, 0.01},                      // CRC-org 3.75; Sydney 3.74
      {"benzoic acid", {4.204}, 0.005},                   // CRC-org 4.204
      {"lactic acid", {3.86}, 0.005},                     // Sydney 3.86
      {"phthalic acid", {2.946, 5.409}, 0.01},            // Fromm
      {"KHP", {2.946, 5.409}, 0.01},                      // Fromm (same acid)
      {"phosphoric acid", {2.148, 7.206, 12.342}, 0.01},  // Fromm; CRC-inorg 2.16; Sydney 7.20
      {"carbonic acid", {6.35, 10.33}, 0.015},            // CRC-inorg; Fromm 6.361 / 10.329
      {"citric acid", {3.13, 4.76, 6.40}, 0.005},         // CRC-org
      {"oxalic acid", {1.25, 4.27}, 0.05},                // CRC-org 1.25, Fromm 4.282; pKa2 spread ±0.05
      {"ammonium chloride", {9.25}, 0.01},                // CRC-inorg 9.25; Sydney 9.24
      {"boric acid", {9.24}, 0.005},                      // Sydney 9.24; Fromm 9.238
      {"TRIS", {8.07}, 0.01},                             // Wikipedia "Tris" 8.07; Bates & Hetzer 8.075 (mem)
  };
  for (const Row& r : rows) {
    INFO(r.name);
    const chem::AnalyteInfo* a = chem::find_analyte(r.name);
    REQUIRE(a != nullptr);
    REQUIRE(a->pKa_25C.size() == r.pKa.size());
    for (std::size_t j = 0; j < r.pKa.size(); ++j) CHECK(a->pKa_25C[j] == close(r.pKa[j], 0.0, r.tol));
    CHECK_FALSE(a->source.empty());
  }
  // TRIS: about -0.028 pKa units per kelvin (REFERENCES §2: -0.028 to -0.03 /°C, Wikipedia "Tris").
  const chem::AnalyteInfo* tris = chem::find_analyte("TRIS");
  REQUIRE(tris->dpKa_dT_per_K.size() == 1);
  CHECK(tris->dpKa_dT_per_K[0] <= -0.028);
  CHECK(tris->dpKa_dT_per_K[0] >= -0.030);
}

TEST_CASE("analytes are found by name, formula and alias, ignoring case", "[chem][analytes]") {
  CHECK(chem::find_analyte("Acetic Acid") == chem::find_analyte("acetic acid"));
  CHECK(chem::find_analyte("ch3cooh") == chem::find_analyte("acetic acid"));
  CHECK(chem::find_analyte("  khp ")->name == "potassium hydrogen phthalate");
  CHECK(chem::find_analyte("H3PO4")->name == "phosphoric acid");
  CHECK(chem::find_analyte("NH4+")->name == "ammonium chloride");
  CHECK(chem::find_analyte("tris")->name == "TRIS");
  CHECK(chem::find_analyte("vinegar") == nullptr);
  CHECK(chem::find_analyte("") == nullptr);
  CHECK_THROWS_AS(chem::analyte("vinegar", 0.1), veq::InputError);
  // Forms as weighed in (trade facts, common practice, no source): KHP has given up one proton, sodium
  // carbonate two; ammonium chloride is the conjugate acid (+1) of ammonia, TRIS the free base.
  CHECK(chem::find_analyte("KHP")->added_form == 1);
  CHECK(chem::find_analyte("Na2CO3")->added_form == 2);
  CHECK(chem::find_analyte("NH4Cl")->top_charge == 1);
  CHECK(chem::find_analyte("NH4Cl")->added_form == 0);
  CHECK(chem::find_analyte("TRIS")->top_charge == 1);
  CHECK(chem::find_analyte("TRIS")->added_form == 1);
  CHECK(chem::find_analyte("HCl")->kind == chem::AnalyteKind::strong_acid);
  CHECK(chem::find_analyte("NaOH")->kind == chem::AnalyteKind::strong_base);
  // Every row has a source and consistent steps.
  for (const auto& a : chem::analyte_table()) {
    INFO(a.name);
    CHECK_FALSE(a.source.empty());
    CHECK(chem::find_analyte(a.name) == &a);
    if (a.kind == chem::AnalyteKind::weak) {
      CHECK_FALSE(a.pKa_25C.empty());
      CHECK(std::is_sorted(a.pKa_25C.begin(), a.pKa_25C.end()));
    }
  }
}
