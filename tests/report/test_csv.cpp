// SPDX-License-Identifier: MIT
// summary.csv fields: RFC 4180 quoting, spreadsheet formula injection neutralised (OWASP), valid UTF-8.
#include <catch2/catch.hpp>
#include <string>
#include <vector>

#include "support/csv_parse.hpp"
#include "veq/report/summary.hpp"

using veq::report::csv_field;

TEST_CASE("csv_field quotes as RFC 4180 says", "[report][csv]") {
  // RFC 4180 §2, rules 5-7: fields holding commas, quotes or line breaks are enclosed in double quotes,
  // and a double quote inside is escaped by another one.
  CHECK(csv_field("plain") == "plain");
  CHECK(csv_field("") == "");
  CHECK(csv_field("a,b") == "\"a,b\"");
  CHECK(csv_field("say \"hi\"") == "\"say \"\"hi\"\"\"");
  CHECK(csv_field("two\nlines") == "\"two\nlines\"");
  CHECK(csv_field("cr\rlf") == "\"cr\rlf\"");
  CHECK(csv_field("semi;colon") == "semi;colon");
}

TEST_CASE("csv_field neutralises formula injection", "[report][csv]") {
  // OWASP "CSV Injection": a cell starting with = + - @, tab or carriage return is evaluated by
  // spreadsheets; prefixing a single quote makes it text.
  CHECK(csv_field("=1+2") == "'=1+2");
  CHECK(csv_field("+41 1 234") == "'+41 1 234");
  CHECK(csv_field("-2+3") == "'-2+3");
  CHECK(csv_field("@SUM(A1:A9)") == "'@SUM(A1:A9)");
  CHECK(csv_field("\tcmd") == "'\tcmd");
  CHECK(csv_field("\r=x") == "\"'\r=x\"");
  CHECK(csv_field("=HYPERLINK(\"http://x\",\"y\")") == "\"'=HYPERLINK(\"\"http://x\"\",\"\"y\"\")\"");
  // Not at the start: left alone.
  CHECK(csv_field("a=b") == "a=b");
}

TEST_CASE("a summary row parses back into its seven fields", "[report][csv]") {
  veq::report::SummaryRow r;
  r.id = "=cmd|' /C calc'!A0";
  r.file = "dir/a, \"b\".csv";
  r.status = "input_error";
  r.endpoints = 0;
  r.result = "";
  r.flags = "";
  r.error = "dir/a, \"b\".csv:3:1: 'x\ny' is not a number";
  const std::string text = veq::report::summary_csv_header() + veq::report::summary_csv_row(r);
  const auto rows = veq::test::parse_csv(text);
  REQUIRE(rows.size() == 2);
  CHECK(rows[0] == std::vector<std::string>{"id", "file", "status", "endpoints", "result", "flags", "error"});
  REQUIRE(rows[1].size() == 7);
  CHECK(rows[1][0] == "'" + r.id);
  CHECK(rows[1][1] == r.file);
  CHECK(rows[1][3] == "0");
  CHECK(rows[1][6] == r.error);
  // Invalid UTF-8 in a file name never reaches the CSV.
  CHECK(csv_field("a\xFFz") == "a\xEF\xBF\xBDz");
}
