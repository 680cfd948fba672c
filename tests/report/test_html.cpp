// SPDX-License-Identifier: MIT
// The HTML report: well-formed (XML 1.0), every plot a standalone SVG, all file text escaped, no script, offline.
#include <fmt/format.h>

#include <catch2/catch.hpp>
#include <regex>
#include <set>
#include <string>

#include "support/charge_balance.hpp"
#include "support/xml_check.hpp"
#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/html.hpp"
#include "veq/report/text.hpp"

using veq::test::check_xml;

namespace {

// A log of 0.1 mol/L HCl (20 mL) titrated with 0.1 mol/L NaOH from the exact charge balance, with the
// given metadata lines in front.
std::string strong_acid_log(const std::string& metadata, bool with_sample_volume = true) {
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  std::string t = metadata;
  if (with_sample_volume) t += "Sample volume: 20 mL\nTitrant: NaOH 0.1 mol/L\n";
  t += "\nVolume (mL);pH\n";
  for (int i = 0; i <= 60; ++i) {
    const double v = 0.5 * i;
    t += fmt::format("{:.2f};{:.3f}\n", v, veq::test::pH_at_volume(s, v));
  }
  return t;
}

// The fixtures come from the ideal (concentration) charge balance, so the fit uses the same.
veq::Analysis analyse(const std::string& text, const std::string& name = "run.csv") {
  veq::AnalyzeOptions o;
  o.fit.activity = veq::chem::ActivityModel::ideal;
  return veq::analyze(veq::ingest::parse_run(text, name), o);
}

// Elements a report may contain: HTML structure and the SVG drawing elements. No script, no
// embedding (iframe, object, embed), no external resources (link, img with src, foreignObject).
const std::set<std::string> kAllowedElements = {
    "html",   "head",       "meta",     "title", "style",   "body",  "header",   "p",    "h1",  "h2",     "h3",
    "aside",  "strong",     "section",  "table", "caption", "thead", "tbody",    "tr",   "th",  "td",     "span",
    "figure", "figcaption", "ul",       "li",    "dl",      "dt",    "dd",       "code", "div", "footer", "a",
    "svg",    "defs",       "clipPath", "rect",  "g",       "line",  "polyline", "path", "text"};

void check_report_page(const std::string& html) {
  const auto r = check_xml(html);
  INFO(r.error);
  REQUIRE(r.ok);
  CHECK(r.root == "html");
  for (const auto& e : r.elements) {
    INFO("element <" << e << ">");
    CHECK(kAllowedElements.count(e) == 1);
  }
  for (const auto& a : r.attributes) {
    INFO("attribute " << a);
    CHECK(a.rfind("on", 0) != 0);  // no event handlers (HTML: onload, onclick, ...)
    CHECK(a != "src");
  }
  // Offline: the only URLs are namespace names; no links out, no imports, no url() but fragment refs.
  const std::regex href(R"(href="([^"]*)\")");
  for (auto it = std::sregex_iterator(html.begin(), html.end(), href); it != std::sregex_iterator(); ++it) {
    const std::string target = (*it)[1];
    INFO("href " << target);
    CHECK(target.find(':') == std::string::npos);  // no scheme: relative links only
  }
  CHECK(html.find("@import") == std::string::npos);
  CHECK(std::regex_search(html, std::regex(R"(url\((?!#))")) == false);
  CHECK(html.find("javascript") == std::string::npos);
  // Every plot parses on its own as an SVG document.
  for (const auto& [b, e] : r.svg_spans) {
    const auto svg = check_xml(std::string_view(html).substr(b, e - b));
    INFO(svg.error);
    CHECK(svg.ok);
    CHECK(svg.root == "svg");
    CHECK(svg.root_attributes.at("xmlns") == "http://www.w3.org/2000/svg");
  }
}

}  // namespace

TEST_CASE("the XML checker rejects what XML 1.0 forbids and accepts what it allows", "[report][xml]") {
  // Each case breaks one well-formedness constraint of XML 1.0 (W3C, 5th edition).
  for (const char* bad : {"<a><b></a></b>",
                          "<a x=1/>",
                          "<a>&nbsp;</a>",
                          "<a>1 < 2</a>",
                          "<a x='1' x='2'/>",
                          "<a/><b/>",
                          "<a>\x01</a>",
                          "<a>x",
                          "<a x=\"<\"/>",
                          "<a>&#0;</a>",
                          "<a><!-- a -- b --></a>",
                          "<a>]]></a>",
                          "text<a/>",
                          "<a>\xC3</a>",
                          "<!DOCTYPE foo><a/>",
                          "<a>&amp</a>"}) {
    INFO(bad);
    CHECK_FALSE(check_xml(bad).ok);
  }
  for (const char* good : {"<a/>",
                           "<!DOCTYPE html>\n<a b=\"&amp;&lt;\" c='\"'>&#169;&#xA9;<b/><!-- c --></a>\n",
                           "<a><![CDATA[ <x> & ]]></a>",
                           "<a>\xC2\xB1 \xE2\x80\xB2</a>"}) {
    INFO(good);
    CHECK(check_xml(good).ok);
  }
}

TEST_CASE("html_escape: the five special characters become references, bad bytes U+FFFD", "[report][html]") {
  // The five characters are XML 1.0's predefined entities (§4.6); &#39; is the reference for the apostrophe.
  CHECK(veq::report::html_escape("<a href=\"x\">Tom & Jerry's</a>") ==
        "&lt;a href=&quot;x&quot;&gt;Tom &amp; Jerry&#39;s&lt;/a&gt;");
  CHECK(veq::report::html_escape("25 \xC2\xB0"
                                 "C") ==
        "25 \xC2\xB0"
        "C");  // valid UTF-8 kept
  CHECK(veq::report::html_escape("a\xFF"
                                 "b") ==
        "a\xEF\xBF\xBD"
        "b");                                                                 // 0xFF is never valid UTF-8 (RFC 3629)
  CHECK(veq::report::html_escape("\xC0\xAF") == "\xEF\xBF\xBD\xEF\xBF\xBD");  // overlong '/' (RFC 3629 §10)
  CHECK(veq::report::html_escape("\xED\xA0\x80") == "\xEF\xBF\xBD\xEF\xBF\xBD\xEF\xBF\xBD");      // a surrogate
  CHECK(veq::report::html_escape(std::string("x\x00y\x1B", 4)) == "x\xEF\xBF\xBDy\xEF\xBF\xBD");  // not XML Chars
  CHECK(veq::report::html_escape("tab\tnew\nline") == "tab\tnew\nline");
}

TEST_CASE("the report is well-formed, has every section with data, and no script", "[report][html]") {
  const veq::Analysis a = analyse(strong_acid_log("Sample: HTML-1\nOperator: A. N. Other\n"));
  REQUIRE(a.endpoints.endpoints.size() == 1);
  const std::string html = veq::report::to_html(a);
  check_report_page(html);
  for (const char* id :
       {"id=\"results\"", "id=\"curve\"", "id=\"fit\"", "id=\"derivatives\"", "id=\"gran\"", "id=\"details\""}) {
    INFO(id);
    CHECK(html.find(id) != std::string::npos);
  }
  // Curve (with the fitted model), the fit's residuals, first and second derivative, and a Gran plot
  // before and after the endpoint.
  CHECK(check_xml(html).svg_spans.size() == 6);
  // Printable on A4; the safety caution on the page.
  CHECK(html.find("@page { size: A4") != std::string::npos);
  CHECK(html.find(veq::report::html_escape(veq::report::safety_caution())) != std::string::npos);
  // A clean curve (exact charge balance) has no flags and no warnings section.
  CHECK(html.find("id=\"flags\"") == std::string::npos);
}

TEST_CASE("the fitted model is drawn on the curve and its residuals plotted", "[report][html]") {
  const veq::Analysis a = analyse(strong_acid_log("Sample: HTML-FIT\n"));
  REQUIRE(a.fit.best.has_value());
  const auto& b = *a.fit.best;
  // 0.1 mol/L HCl from the test's own exact charge balance (Harris, Quantitative Chemical Analysis,
  // strong acid-strong base titration; from memory): the fit recovers it to the rounding of the pH.
  const auto* c = b.parameter("c");
  REQUIRE(c != nullptr);
  CHECK(c->value == Approx(0.1).epsilon(2e-3));
  REQUIRE(b.model_values.size() == b.residuals.size());
  for (std::size_t i = 0; i < b.residuals.size(); ++i) CHECK(std::fabs(b.residuals[i]) < 0.01);
  const std::string html = veq::report::to_html(a);
  check_report_page(html);
  CHECK(html.find("fitted model") != std::string::npos);
  CHECK(html.find("Residuals of the fit") != std::string::npos);
  CHECK(html.find("<strong>" + veq::report::html_escape(b.model) + "</strong>") != std::string::npos);
  // The curve plot carries two polylines (readings and model) once the fit exists.
  const std::string curve = html.substr(html.find("id=\"curve\""), html.find("id=\"fit\"") - html.find("id=\"curve\""));
  std::size_t lines = 0;
  for (std::size_t at = curve.find("<polyline"); at != std::string::npos; at = curve.find("<polyline", at + 1)) ++lines;
  CHECK(lines == 2);
}

TEST_CASE("sections without data are left out: no sample volume, no Gran plot", "[report][html]") {
  const veq::Analysis a = analyse(strong_acid_log("Sample: HTML-2\n", false));
  REQUIRE(a.gran.size() == 1);
  CHECK_FALSE(a.gran[0].before.has_value());
  const std::string html = veq::report::to_html(a);
  check_report_page(html);
  CHECK(html.find("id=\"gran\"") == std::string::npos);
  CHECK(html.find("id=\"fit\"") == std::string::npos);       // no sample volume: no fit
  CHECK(html.find("id=\"warnings\"") != std::string::npos);  // Gran skipped is a warning
  CHECK(check_xml(html).svg_spans.size() == 3);
}

TEST_CASE("a run without an endpoint says so, with the reason", "[report][html]") {
  const veq::Analysis a =
      analyse("Volume (mL);pH\n0;3.10\n1;3.11\n2;3.12\n3;3.13\n4;3.14\n5;3.15\n6;3.16\n7;3.17\n8;3.18\n");
  REQUIRE(a.endpoints.endpoints.empty());
  const std::string html = veq::report::to_html(a);
  check_report_page(html);
  CHECK(html.find("No endpoint found") != std::string::npos);
}

TEST_CASE("text from the file is escaped everywhere: metadata, names, notes", "[report][html]") {
  const std::string hostile = "<script>alert('x')</script> \"quoted\" & <b onclick=\"steal()\">bold</b>";
  const std::string log = strong_acid_log("Sample: <script>alert(1)</script>\nOperator: " + hostile +
                                          "\nComment: ]]> <!-- --> &nbsp; \xFF\xFE\n") +
                          "# note: <img src=x onerror=alert(2)>\n";
  const veq::Analysis a = analyse(log, "<evil>&\"name'.csv");
  const std::string html = veq::report::to_html(a);
  check_report_page(html);
  CHECK(html.find("<script") == std::string::npos);
  CHECK(html.find("<b ") == std::string::npos);
  CHECK(html.find("<img") == std::string::npos);
  CHECK(html.find("&lt;script&gt;alert(1)&lt;/script&gt;") != std::string::npos);
  CHECK(html.find("&lt;evil&gt;&amp;&quot;name&#39;.csv") != std::string::npos);
}

TEST_CASE("same analysis, same HTML bytes; and the thumbnail is a valid SVG", "[report][html]") {
  const std::string log = strong_acid_log("Sample: SAME\n");
  CHECK(veq::report::to_html(analyse(log)) == veq::report::to_html(analyse(log)));
  const veq::Analysis a = analyse(log);
  const auto t = veq::report::thumbnail(a);
  CHECK(t.points_px.size() >= 2);
  CHECK(t.points_px.size() <= static_cast<std::size_t>(veq::report::kThumbWidth) + 1);
  REQUIRE(t.endpoints_px.size() == 1);
  for (const auto& [x, y] : t.points_px) {
    CHECK(x >= 0.0);
    CHECK(x <= veq::report::kThumbWidth);
    CHECK(y >= 0.0);
    CHECK(y <= veq::report::kThumbHeight);
  }
  const auto svg = check_xml(veq::report::thumbnail_svg(t));
  INFO(svg.error);
  CHECK(svg.ok);
  CHECK(svg.root == "svg");
  CHECK(check_xml(veq::report::thumbnail_svg(veq::report::Thumbnail{})).ok);
}

TEST_CASE("report options are validated", "[report][html]") {
  veq::report::HtmlOptions o;
  CHECK(o.validate().empty());
  o.plot_width_px = 10;
  CHECK(o.validate().size() == 1);
  CHECK_THROWS_AS(veq::report::to_html(analyse(strong_acid_log("")), o), veq::InputError);
}
