// SPDX-License-Identifier: MIT
// Ingest reads the dialects that instruments and people really write.
#include <catch2/catch.hpp>
#include <string>

#include "ingest/text.hpp"
#include "support/approx.hpp"
#include "veq/ingest/reader.hpp"

using veq::Run;
using veq::SignalKind;
using veq::ingest::parse_run;

namespace {

// Three readings that every dialect below encodes.
void check_three(const Run& r) {
  REQUIRE(r.volume_mL.size() == 3);
  CHECK(r.volume_mL[0] == 0.0);
  CHECK(r.volume_mL[1] == 12.5);
  CHECK(r.volume_mL[2] == 25.0);
  CHECK(r.signal_values[0] == 3.12);
  CHECK(r.signal_values[1] == 4.75);
  CHECK(r.signal_values[2] == 8.71);
}

std::string utf16(const std::string& ascii, bool little_endian) {
  std::string out = little_endian ? std::string("\xFF\xFE", 2) : std::string("\xFE\xFF", 2);
  for (char c : ascii) {
    if (little_endian)
      out += c, out += '\0';
    else
      out += '\0', out += c;
  }
  return out;
}

}  // namespace

TEST_CASE("comma separated, decimal point", "[ingest][dialect]") {
  const Run r = parse_run("Volume (mL),pH\n0.00,3.12\n12.50,4.75\n25.00,8.71\n", "a.csv");
  check_three(r);
  CHECK(r.dialect.separator == ',');
  CHECK(r.dialect.decimal == '.');
  CHECK(r.dialect.header_line == 1);
  CHECK(r.signal == SignalKind::ph);
}

TEST_CASE("semicolon separated with decimal comma", "[ingest][dialect]") {
  const Run r = parse_run("Volume (mL);pH\n0,00;3,12\n12,50;4,75\n25,00;8,71\n", "b.csv");
  check_three(r);
  CHECK(r.dialect.separator == ';');
  CHECK(r.dialect.decimal == ',');
}

TEST_CASE("tab separated, and tab with decimal comma", "[ingest][dialect]") {
  check_three(parse_run("V/mL\tpH\n0.00\t3.12\n12.50\t4.75\n25.00\t8.71\n", "c.tsv"));
  const Run r = parse_run("V/mL\tpH\n0,00\t3,12\n12,50\t4,75\n25,00\t8,71\n", "c2.tsv");
  check_three(r);
  CHECK(r.dialect.separator == '\t');
  CHECK(r.dialect.decimal == ',');
}

TEST_CASE("vertical bar separated", "[ingest][dialect]") {
  const Run r = parse_run("Volume (mL)|pH|\n0.00|3.12|\n12.50|4.75|\n25.00|8.71|\n", "d.txt");
  check_three(r);
  CHECK(r.dialect.separator == '|');
}

TEST_CASE("runs of spaces, header names with spaces", "[ingest][dialect]") {
  const Run r = parse_run("Volume (mL)    pH\n  0.00    3.12\n 12.50    4.75\n 25.00    8.71\n", "e.txt");
  check_three(r);
  CHECK(r.dialect.separator == ' ');
  const Run r2 = parse_run("Volume (mL) pH\n0,00 3,12\n12,50 4,75\n25,00 8,71\n", "e2.txt");
  check_three(r2);
  CHECK(r2.dialect.decimal == ',');
}

TEST_CASE("quoted fields, also holding a decimal comma", "[ingest][dialect]") {
  check_three(
      parse_run("\"Volume (mL)\",\"pH\"\n\"0.00\",\"3.12\"\n\"12.50\",\"4.75\"\n\"25.00\",\"8.71\"\n", "f.csv"));
  const Run r =
      parse_run("\"Volume, mL\",\"pH\"\n\"0,00\",\"3,12\"\n\"12,50\",\"4,75\"\n\"25,00\",\"8,71\"\n", "f2.csv");
  check_three(r);
  CHECK(r.dialect.decimal == ',');
}

TEST_CASE("UTF-8 with and without BOM", "[ingest][dialect]") {
  const Run r = parse_run("\xEF\xBB\xBFVolume (mL);pH\n0.00;3.12\n12.50;4.75\n25.00;8.71\n", "g.csv");
  check_three(r);
  CHECK(r.dialect.encoding == "utf-8-bom");
  CHECK(r.volume_column.header == "Volume (mL)");
  CHECK(parse_run("Volume (mL);pH\n0.00;3.12\n12.50;4.75\n25.00;8.71\n", "g2.csv").dialect.encoding == "utf-8");
}

TEST_CASE("UTF-16 little and big endian with BOM are converted", "[ingest][dialect]") {
  const std::string text =
      "Temp/\xC2\xB0"
      "C;Volume (mL);pH\r\n25.0;0.00;3.12\r\n25.0;12.50;4.75\r\n25.0;25.00;8.71\r\n";
  // Build UTF-16 by hand: the degree sign U+00B0 is one code unit.
  auto encode = [&](bool le) {
    std::string ascii = "Temp/";
    std::string out = utf16(ascii, le);
    out += le ? std::string("\xB0\x00", 2) : std::string("\x00\xB0", 2);
    const std::string rest = "C;Volume (mL);pH\r\n25.0;0.00;3.12\r\n25.0;12.50;4.75\r\n25.0;25.00;8.71\r\n";
    out += utf16(rest, le).substr(2);
    return out;
  };
  (void)text;
  const Run le = parse_run(encode(true), "h16le.csv");
  check_three(le);
  CHECK(le.dialect.encoding == "utf-16le");
  REQUIRE(le.temperature_C.size() == 3);
  CHECK(le.temperature_C[0] == 25.0);
  const Run be = parse_run(encode(false), "h16be.csv");
  check_three(be);
  CHECK(be.dialect.encoding == "utf-16be");
  CHECK(be.dialect.line_ending == "crlf");
}

TEST_CASE("a Latin-1 degree sign in a header", "[ingest][dialect]") {
  const Run r = parse_run(
      "Volume (mL);pH;Temp/\xB0"
      "C\n0.00;3.12;24.9\n12.50;4.75;25.0\n25.00;8.71;25.1\n",
      "i.csv");
  check_three(r);
  CHECK(r.dialect.encoding == "latin-1");
  REQUIRE(r.temperature_column.has_value());
  CHECK(r.temperature_column->unit == "degC");
  REQUIRE(r.facts.temperature_C.has_value());
  CHECK(*r.facts.temperature_C == veq::test::close(25.0, 1e-12));
}

TEST_CASE("CRLF, CR and LF line ends, blank lines, trailing separators", "[ingest][dialect]") {
  const Run crlf = parse_run("Volume (mL),pH\r\n0.00,3.12\r\n\r\n12.50,4.75\r\n25.00,8.71\r\n", "j1.csv");
  check_three(crlf);
  CHECK(crlf.dialect.line_ending == "crlf");
  const Run cr = parse_run("Volume (mL),pH\r0.00,3.12\r12.50,4.75\r\r25.00,8.71\r", "j2.csv");
  check_three(cr);
  CHECK(cr.dialect.line_ending == "cr");
  CHECK(cr.line[2] == 5);  // line numbers count CR line ends, blank line included
  const Run lf = parse_run("Volume (mL);pH;;\n\n0.00;3.12;;\n12.50;4.75;\n25.00;8.71;;;\n\n\n", "j3.csv");
  check_three(lf);
  CHECK(lf.line[0] == 3);
  // No final line end at all.
  check_three(parse_run("Volume (mL),pH\n0.00,3.12\n12.50,4.75\n25.00,8.71", "j4.csv"));
}

TEST_CASE("metadata block in its three forms, kept and read for facts", "[ingest][metadata]") {
  const Run r = parse_run(
      "Titration log\n"
      "Sample: NW-0413-B\n"
      "Sample volume = 25,00 mL\n"
      "Titrant,NaOH 0.1000 mol/L\n"
      "Temperature: 22.5 °C\n"
      "Operator = R. Okafor\n"
      "Date: 2026-11-03 14:22\n"
      "\n"
      "Volume (mL);pH\n0,00;3,12\n12,50;4,75\n25,00;8,71\n",
      "k.csv");
  check_three(r);
  CHECK(r.facts.sample_id == "NW-0413-B");
  REQUIRE(r.facts.sample_volume_mL);
  CHECK(*r.facts.sample_volume_mL == 25.0);
  REQUIRE(r.facts.titrant_conc_mol_L);
  CHECK(*r.facts.titrant_conc_mol_L == 0.1);
  CHECK(r.facts.titrant_kind == veq::TitrantKind::base);
  REQUIRE(r.facts.temperature_C);
  CHECK(*r.facts.temperature_C == 22.5);
  REQUIRE(r.metadata.size() == 6);
  CHECK(r.metadata[4].first == "Operator");
  CHECK(r.metadata[4].second == "R. Okafor");
  CHECK(r.metadata[5].second == "2026-11-03 14:22");
  REQUIRE(r.notes.size() == 1);
  CHECK(r.notes[0] == "Titration log");
}

TEST_CASE("metadata units: uL sample, mmol/L titrant, kelvin, HCl is an acid", "[ingest][metadata]") {
  const Run r = parse_run(
      "sample volume (uL): 5000\ntitrant: HCl\ntitrant concentration: 100 mmol/L\ntemperature: 298.15 K\n"
      "V/mL,pH\n0,11.2\n1,10.9\n2,10.1\n",
      "l.csv");
  REQUIRE(r.facts.sample_volume_mL);
  CHECK(*r.facts.sample_volume_mL == veq::test::close(5.0, 1e-12));
  REQUIRE(r.facts.titrant_conc_mol_L);
  CHECK(*r.facts.titrant_conc_mol_L == veq::test::close(0.1, 1e-12));
  CHECK(r.facts.titrant_kind == veq::TitrantKind::acid);
  REQUIRE(r.facts.temperature_C);
  CHECK(*r.facts.temperature_C == veq::test::close(25.0, 1e-9));
}

TEST_CASE("header names as instruments and people write them", "[ingest][columns]") {
  SECTION("V/mL and E (mV), potential in any order, extra columns ignored") {
    const Run r =
        parse_run("Time (s);E (mV);Status;V/mL\n0;250.1;ok;0.00\n10;180.4;ok;12.50\n20;-95.2;ok;25.00\n", "m1.csv");
    CHECK(r.signal == SignalKind::mv);
    CHECK(r.volume_mL[1] == 12.5);
    CHECK(r.signal_values[2] == -95.2);
    REQUIRE(r.time_s.size() == 3);
    CHECK(r.time_s[2] == 20.0);
  }
  SECTION("titrant_uL converts microlitres") {
    const Run r = parse_run("titrant_uL,pH\n0,3.12\n12500,4.75\n25000,8.71\n", "m2.csv");
    check_three(r);
    CHECK(r.volume_column.unit == "uL");
  }
  SECTION("ml NaOH, Temp/°C (UTF-8), pH last") {
    const Run r = parse_run(
        "Temp/\xC2\xB0"
        "C;ml NaOH;pH\n25,0;0,00;3,12\n25,1;12,50;4,75\n25,0;25,00;8,71\n",
        "m3.csv");
    check_three(r);
    REQUIRE(r.temperature_C.size() == 3);
    CHECK(r.temperature_C[1] == 25.1);
  }
  SECTION("derivative columns are not mistaken for readings") {
    const Run r =
        parse_run("dpH/dV,Volume [ml],pH,dV (mL)\n0,0.00,3.12,0\n0.1,12.50,4.75,12.5\n0.2,25.00,8.71,12.5\n", "m4.csv");
    check_three(r);
    CHECK(r.volume_column.index == 1);
  }
  SECTION("potential in volts is converted to mV; temperature in K") {
    const Run r =
        parse_run("U (V)\tT (K)\tVol (mL)\n0.2501\t298.15\t0\n0.1804\t298.15\t12.5\n-0.0952\t298.15\t25\n", "m5.tsv");
    CHECK(r.signal == SignalKind::mv);
    CHECK(r.signal_values[0] == veq::test::close(250.1, 1e-12));
    REQUIRE(r.temperature_C.size() == 3);
    CHECK(r.temperature_C[0] == veq::test::close(25.0, 1e-9));
  }
  SECTION("two header lines: names, then units") {
    const Run r = parse_run("Volume;pH\nmL;\n0.00;3.12\n12.50;4.75\n25.00;8.71\n", "m6.csv");
    check_three(r);
    CHECK(r.dialect.header_line == 1);
  }
}

TEST_CASE("a file with no header and two numeric columns is volume, pH with a warning", "[ingest][columns]") {
  const Run r = parse_run("0.00 3.12\n12.50 4.75\n25.00 8.71\n", "n.txt");
  check_three(r);
  CHECK(r.dialect.header_line == 0);
  REQUIRE_FALSE(r.warnings.empty());
  CHECK(r.warnings.front().code == "no_header");
}

TEST_CASE("overrides: --columns and --volume-unit", "[ingest][columns]") {
  veq::ingest::IngestOptions o;
  o.columns = veq::ingest::parse_column_overrides("volume=2,signal=4");
  o.volume_unit = "uL";
  const Run r = parse_run("1;0;x;3.12\n2;12500;x;4.75\n3;25000;x;8.71\n", "o.csv", o);
  check_three(r);
  CHECK_THROWS_AS(veq::ingest::parse_column_overrides("volume=0"), veq::InputError);
  CHECK_THROWS_AS(veq::ingest::parse_column_overrides("colour=2"), veq::InputError);
}

TEST_CASE("text lines after the table become notes with a warning", "[ingest]") {
  const Run r =
      parse_run("Volume (mL);pH\n0.00;3.12\n12.50;4.75\n25.00;8.71\nEnd of titration\nEP1;12.31 mL\n", "p.csv");
  check_three(r);
  REQUIRE(r.notes.size() == 2);
  CHECK(r.notes[0] == "End of titration");
  int text_warnings = 0;
  for (const auto& w : r.warnings) text_warnings += w.code == "text_after_table";
  CHECK(text_warnings == 2);
}

TEST_CASE("numbers are read exactly (fast_float), decimals give the resolution", "[ingest]") {
  const Run r = parse_run("V (mL),pH\n0.1,7.123\n0.2,7.456\n0.30000000000000004,7.5\n", "q.csv");
  CHECK(r.volume_mL[0] == 0.1);
  CHECK(r.volume_mL[2] == 0.30000000000000004);
  CHECK(r.signal_resolution == veq::test::close(0.001, 1e-12));
}

TEST_CASE("sorting on request accepts rows out of order", "[ingest]") {
  veq::ingest::IngestOptions o;
  o.sort_by_volume = true;
  const Run r = parse_run("V (mL),pH\n25.00,8.71\n0.00,3.12\n12.50,4.75\n", "r.csv", o);
  check_three(r);
  CHECK(r.line[0] == 3);
}

TEST_CASE("whole-file and streaming reads give the same run", "[ingest]") {
  // Every dialect feature at once: UTF-8 BOM, CR line ends, metadata, decimal comma, text after the table.
  std::string text =
      "\xEF\xBB\xBFSample: S-1\rSample volume = 25,0 mL\r\rV/mL;pH;Temp/\xC2\xB0"
      "C\r";
  for (int i = 0; i < 3000; ++i) text += std::to_string(i) + ",05;" + std::to_string(3 + i % 7) + ",12;25,0\r";
  text += "End\r";
  veq::ingest::IngestOptions stream;
  stream.whole_file_limit_bytes = 0;
  const Run a = parse_run(text, "w.csv");
  const Run b = parse_run(text, "w.csv", stream);
  CHECK(a.volume_mL == b.volume_mL);
  CHECK(a.signal_values == b.signal_values);
  CHECK(a.line == b.line);
  CHECK(a.temperature_C == b.temperature_C);
  CHECK(a.metadata == b.metadata);
  CHECK(a.notes == b.notes);
  CHECK(a.dialect.encoding == b.dialect.encoding);
  CHECK(a.dialect.line_ending == b.dialect.line_ending);
  CHECK(a.volume_mL.size() == 3000);
}

TEST_CASE("a header repeated inside the table (paginated export) is skipped with a warning", "[ingest]") {
  const Run r = parse_run("Volume (mL);pH\n0.00;3.12\n12.50;4.75\nVolume (mL);pH\n25.00;8.71\n", "pages.csv");
  check_three(r);
  bool warned = false;
  for (const auto& w : r.warnings) warned = warned || (w.code == "repeated_header" && w.where.line == 4);
  CHECK(warned);
}

TEST_CASE("a titrant given as a normality is converted to mol/L by its equivalents", "[ingest][metadata]") {
  // Standard Methods 2320 B titrates alkalinity with 0.02 N H2SO4: 0.01 mol/L (2 equivalents per mole).
  const Run r = parse_run("Titrant: H2SO4 0.02 N\nVolume (mL);pH\n0;8.3\n1;7.1\n2;4.5\n", "n.csv");
  REQUIRE(r.facts.titrant_conc_mol_L);
  CHECK(*r.facts.titrant_conc_mol_L == veq::test::close(0.01, 1e-12));
  CHECK(r.facts.titrant_kind == veq::TitrantKind::acid);
  const Run h = parse_run("Titrant: HCl\nNormality: 0.1\nVolume (mL);pH\n0;8.3\n1;7.1\n2;4.5\n", "h.csv");
  REQUIRE(h.facts.titrant_conc_mol_L);
  CHECK(*h.facts.titrant_conc_mol_L == veq::test::close(0.1, 1e-12));  // HCl: 1 equivalent per mole
}

TEST_CASE("a two-line header with (-) as the unit of pH", "[ingest][columns]") {
  const Run r = parse_run("Volume;pH\n(mL);(-)\n0.00;3.12\n12.50;4.75\n25.00;8.71\n", "u.csv");
  check_three(r);
  CHECK(r.signal == SignalKind::ph);
  // An empty bracket says "no unit" as well.
  for (const char* none : {"[ ]", "[]", "()"}) {
    CAPTURE(none);
    const Run e = parse_run(std::string("Volume,pH,Temperature\n[mL],") + none +
                                ",[\xC2\xB0"
                                "C]\n0.00,3.12,25\n12.50,4.75,25\n25.00,8.71,25\n",
                            "e.csv");
    check_three(e);
    CHECK(e.dialect.header_line == 1);
  }
}

TEST_CASE("German metadata keys of lab exports are read", "[ingest][metadata]") {
  const Run r = parse_run(
      "Probe: W-12\nProbenvolumen: 50 ml\nTitriermittel: NaOH 0,1 mol/l\nTemperatur: 21 °C\n"
      "Volumen (ml);pH-Wert\n0,00;3,12\n12,50;4,75\n25,00;8,71\n",
      "de.csv");
  check_three(r);
  CHECK(r.facts.sample_id == "W-12");
  REQUIRE(r.facts.sample_volume_mL);
  CHECK(*r.facts.sample_volume_mL == 50.0);
  REQUIRE(r.facts.titrant_conc_mol_L);
  CHECK(*r.facts.titrant_conc_mol_L == 0.1);
  CHECK(r.facts.titrant_kind == veq::TitrantKind::base);
  REQUIRE(r.facts.temperature_C);
  CHECK(*r.facts.temperature_C == 21.0);
}

TEST_CASE("a derivative column whose first cell is empty keeps the header and the first reading", "[ingest][columns]") {
  // Exports with a dpH/dV column leave its first cell empty: there is no derivative before the second
  // reading (common practice, no source).
  for (const char* sep : {",", ";", "\t"}) {
    CAPTURE(sep);
    const std::string s(sep);
    const Run r = parse_run("Volume (mL)" + s + "pH" + s + "dpH/dV\n0.00" + s + "3.12" + s + "\n12.50" + s + "4.75" +
                                s + "0.13\n25.00" + s + "8.71" + s + "0.32\n",
                            "d.csv");
    check_three(r);
    CHECK(r.dialect.header_line == 1);
    for (const auto& w : r.warnings) CHECK(w.code != "text_after_table");
  }
  // In microlitres too: the header's unit is kept.
  const Run u = parse_run("Vol (uL)\tpH\tdpH/dV\n0\t3.12\t\n12500\t4.75\t0.13\n25000\t8.71\t0.32\n", "u.tsv");
  check_three(u);
}

TEST_CASE("volumes with no unit that no burette holds as mL get a warning to check the unit", "[ingest][columns]") {
  // A burette or dosing unit holds 5 to 100 mL (common practice, no source): 26000 "mL" is most often uL.
  const Run big = parse_run("Volume,pH\n0,3.12\n12500,4.75\n26000,8.71\n", "ul.csv");
  bool doubtful = false;
  for (const auto& w : big.warnings) doubtful = doubtful || w.code == "volume_unit_doubtful";
  CHECK(doubtful);
  const Run small = parse_run("Volume,pH\n0,3.12\n12.5,4.75\n26,8.71\n", "ml.csv");
  for (const auto& w : small.warnings) CHECK(w.code != "volume_unit_doubtful");
  // A stated unit is not doubted.
  const Run stated = parse_run("Volume (uL),pH\n0,3.12\n12500,4.75\n25000,8.71\n", "st.csv");
  check_three(stated);
  for (const auto& w : stated.warnings) CHECK(w.code != "volume_unit_doubtful");
}

TEST_CASE("a summary line after the table is kept whole as a note", "[ingest]") {
  const Run r = parse_run("Volumen (ml);pH\n0,00;3,12\n12,50;4,75\n25,00;8,71\nEndpunkt 1;20,01 mL;pH 7,00\n", "e.csv");
  check_three(r);
  REQUIRE(r.notes.size() == 1);
  CHECK(r.notes[0] == "Endpunkt 1;20,01 mL;pH 7,00");
}

TEST_CASE("a titrant concentration written c(NaOH) = 0.1 mol/l names the titrant too", "[ingest][metadata]") {
  // c(X) for the amount concentration of X: IUPAC Green Book, 3rd ed. (2007) §2.10 (from memory).
  const Run r =
      parse_run("V0 = 20 ml\nc(NaOH) = 0.1 mol/l\nV (ml)\tpH\n0.00\t3.12\n12.50\t4.75\n25.00\t8.71\n", "c.txt");
  check_three(r);
  REQUIRE(r.facts.titrant_conc_mol_L);
  CHECK(*r.facts.titrant_conc_mol_L == 0.1);
  CHECK(r.facts.titrant_kind == veq::TitrantKind::base);
  CHECK(r.facts.titrant_name == "NaOH");
  const Run h = parse_run("c(HCl) = 0.05 mol/L\nV (ml)\tpH\n0.00\t3.12\n12.50\t4.75\n25.00\t8.71\n", "h.txt");
  REQUIRE(h.facts.titrant_conc_mol_L);
  CHECK(*h.facts.titrant_conc_mol_L == 0.05);
  CHECK(h.facts.titrant_kind == veq::TitrantKind::acid);
}

TEST_CASE("decimal-comma numbers with points grouping the thousands, as uL exports write them", "[ingest][dialect]") {
  // 12.500,0 uL = 12.5 mL: points group thousands where the comma is the decimal sign (common practice in
  // decimal-comma locales, no source).
  const Run r = parse_run("Volume [uL];pH\n0,0;3,12\n12.500,0;4,75\n25.000,0;8,71\n", "g.csv");
  check_three(r);
  CHECK(r.dialect.separator == ';');
  CHECK(r.dialect.decimal == ',');
  // Points that do not group thousands are not numbers there: the row is an error.
  CHECK_THROWS_AS(parse_run("Volume [uL];pH\n0,0;3,12\n12.50,0;4,75\n25.000,0;8,71\n26.000,0;9,01\n", "b.csv"),
                  veq::InputError);
  double v = 0.0;
  using veq::ingest::detail::NumberStatus;
  CHECK(veq::ingest::detail::parse_number("-1.234.567,5", ',', v) == NumberStatus::ok);
  CHECK(v == -1234567.5);
  CHECK(veq::ingest::detail::parse_number("1.5", ',', v) == NumberStatus::not_a_number);
  CHECK(veq::ingest::detail::parse_number("1.2345,0", ',', v) == NumberStatus::not_a_number);
  CHECK(veq::ingest::detail::parse_number("1.250", '.', v) == NumberStatus::ok);
  CHECK(v == 1.25);
}

TEST_CASE("a temperature column in degrees Fahrenheit is converted to Celsius", "[ingest][columns]") {
  // C = (F - 32) x 5/9 (NIST SP 811 (2008) B.9, from memory): 98.6 F = 37 C, 77 F = 25 C.
  const Run r = parse_run(
      "Volume (mL),pH,Temp (\xC2\xB0"
      "F)\n0.00,3.12,98.6\n12.50,4.75,77.0\n25.00,8.71,77.0\n",
      "f.csv");
  check_three(r);
  REQUIRE(r.temperature_C.size() == 3);
  CHECK(r.temperature_C[0] == veq::test::close(37.0, 1e-12));
  CHECK(r.temperature_C[1] == veq::test::close(25.0, 1e-12));
}

TEST_CASE("Windows-1252 dashes and quotes in an 8-bit export become their characters", "[ingest][dialect]") {
  // 0x96 is the en dash and 0x93/0x94 the curly double quotes in Windows-1252 (the code page's table,
  // from memory); Latin-1's 0xB0 is the degree sign.
  const Run r = parse_run(
      "Sample: TC\x96"
      "111\nNote: \x93rinse\x94\nVolume (mL);pH;T (\xB0"
      "C)\n0.00;3.12;25\n12.50;4.75;25\n"
      "25.00;8.71;25\n",
      "w.csv");
  check_three(r);
  CHECK(r.facts.sample_id ==
        "TC\xE2\x80\x93"
        "111");
  bool quoted = false;
  for (const auto& [k, v] : r.metadata) quoted = quoted || v == "\xE2\x80\x9Crinse\xE2\x80\x9D";
  CHECK(quoted);
}
