// SPDX-License-Identifier: MIT
// summary.csv rows (RFC 4180, formula injection neutralised) and index.html in streamable parts.
#include "veq/report/summary.hpp"

#include <fmt/format.h>

#include "report/utf8.hpp"
#include "veq/analyze.hpp"
#include "veq/report/text.hpp"

namespace veq::report {

std::string csv_field(std::string_view text) {
  std::string v = detail::valid_utf8(text);
  // A spreadsheet evaluates a cell that starts with one of these as a formula
  // (OWASP, "CSV Injection"); the apostrophe makes it text and is not shown.
  if (!v.empty() && (v[0] == '=' || v[0] == '+' || v[0] == '-' || v[0] == '@' || v[0] == '\t' || v[0] == '\r')) {
    v.insert(v.begin(), '\'');
  }
  if (v.find_first_of(",\"\r\n") == std::string::npos) return v;
  std::string q = "\"";
  for (const char c : v) {
    if (c == '"') q += '"';
    q += c;
  }
  q += '"';
  return q;
}

std::string summary_csv_header() {
  return "id,file,status,endpoints,result,flags,error\r\n";
}

std::string summary_csv_row(const SummaryRow& r) {
  return csv_field(r.id) + ',' + csv_field(r.file) + ',' + csv_field(r.status) + ',' + std::to_string(r.endpoints) +
         ',' + csv_field(r.result) + ',' + csv_field(r.flags) + ',' + csv_field(r.error) + "\r\n";
}

namespace {

constexpr std::string_view kIndexCss = R"css(
:root { --ink: #1b1f24; --muted: #5b6470; --line: #d5dae0; --accent: #1d4f7a; --warn: #8a5300; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; color: var(--ink);
  margin: 1.5rem auto; padding: 0 1rem; max-width: 80rem; line-height: 1.4; }
h1 { font-size: 1.5rem; margin: 0.1rem 0 0.3rem; }
.kicker { text-transform: uppercase; letter-spacing: 0.08em; font-size: 0.75rem; color: var(--muted); margin: 0; }
.caution { border-left: 5px solid var(--warn); background: #fff6e5; padding: 0.5rem 0.8rem; margin: 1rem 0; font-size: 0.9rem; }
.counts span { display: inline-block; margin-right: 1rem; }
table { border-collapse: collapse; width: 100%; font-size: 0.88rem; }
th, td { border-bottom: 1px solid var(--line); padding: 0.25rem 0.45rem; text-align: left; vertical-align: middle; }
thead th { background: #eef2f6; position: sticky; top: 0; }
td.num { text-align: right; font-variant-numeric: tabular-nums; }
td.file { word-break: break-all; }
.st { display: inline-block; border-radius: 3px; padding: 0 0.35rem; font-size: 0.8rem; border: 1px solid; white-space: nowrap; }
.st-ok { color: #1e6b2f; border-color: #1e6b2f; }
.st-flagged { color: var(--warn); border-color: var(--warn); }
.st-fail { color: #a32020; border-color: #a32020; background: #fdf0f0; }
.st-not_run { color: var(--muted); border-color: var(--muted); }
.err { color: #a32020; }
svg.thumb { display: block; }
@page { size: A4 landscape; margin: 12mm; }
@media print {
  body { max-width: none; margin: 0; font-size: 9pt; }
  thead th { position: static; }
  tr { break-inside: avoid; page-break-inside: avoid; }
  a { color: inherit; text-decoration: none; }
}
)css";

std::string esc(std::string_view s) {
  return html_escape(s);
}

std::string status_class(std::string_view status) {
  if (status == "ok") return "st-ok";
  if (status == "flagged") return "st-flagged";
  if (status == "not_run") return "st-not_run";
  return "st-fail";
}

}  // namespace

std::string index_html_begin(const IndexInfo& info) {
  std::string s;
  s +=
      "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n";
  s += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n";
  s += "<meta name=\"generator\" content=\"veq " + esc(version()) + "\"/>\n";
  s += "<title>veq batch: " + esc(info.input) + "</title>\n<style>" + std::string(kIndexCss) +
       "</style>\n</head>\n<body>\n";
  s += "<header>\n<p class=\"kicker\">Batch of titration runs</p>\n<h1>" + esc(info.input) + "</h1>\n";
  std::string facts = fmt::format("{} runs", info.total);
  if (!info.shard.empty()) facts += " (shard " + esc(info.shard) + ")";
  if (!info.method.empty()) facts += "; method " + esc(info.method);
  s += "<p>" + facts + "</p>\n<p class=\"counts\">";
  for (const auto& [name, n] : info.counts) {
    if (n == 0) continue;
    s += fmt::format("<span><span class=\"st {}\">{}</span> {}</span>", status_class(name), esc(name), n);
  }
  s += "</p>\n</header>\n";
  s += "<aside class=\"caution\" role=\"note\"><strong>Safety.</strong> " + esc(safety_caution()) +
       " Follow your lab's own procedures; they take precedence over anything shown here.</aside>\n";
  s += "<p>Files: <a href=\"summary.csv\">summary.csv</a> &#183; <a href=\"summary.json\">summary.json</a> &#183; "
       "<a href=\"errors.txt\">errors.txt</a></p>\n";
  s += "<table>\n<thead><tr><th>#</th><th>Sample</th><th>File</th><th>Status</th><th>Endpoints</th>"
       "<th>" +
       std::string(info.method.empty() ? "Endpoint volumes (mL &#177; u)" : "Result (with its unit)") +
       "</th><th>Flags or reason</th><th>Curve</th></tr></thead>\n<tbody>\n";
  return s;
}

std::string index_html_row(const SummaryRow& r, std::size_t number) {
  std::string file = esc(r.file);
  if (!r.report_href.empty()) file = "<a href=\"" + esc(r.report_href) + "\">" + file + "</a>";
  std::string note = esc(r.flags);
  if (!r.error.empty()) note = "<span class=\"err\">" + esc(r.error) + "</span>";
  return fmt::format(
      "<tr><td class=\"num\">{}</td><td>{}</td><td class=\"file\">{}</td><td><span class=\"st {}\">{}</span></td>"
      "<td class=\"num\">{}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
      number,
      esc(r.id),
      file,
      status_class(r.status),
      esc(r.status),
      r.endpoints,
      esc(r.result),
      note,
      r.thumbnail ? thumbnail_svg(*r.thumbnail) : std::string());
}

std::string index_html_end(const std::vector<ReplicateRow>& replicates) {
  std::string out = "</tbody>\n</table>\n";
  if (!replicates.empty()) {
    out +=
        "<h2>Replicates</h2>\n<table class=\"replicates\">\n<thead><tr><th>Group</th><th>Result</th><th>n</th>"
        "<th>Mean</th><th>SD</th><th>RSD</th><th>95 % interval</th><th>Suspect outlier (kept)</th><th>RSD limit</th>"
        "</tr></thead>\n<tbody>\n";
    for (const auto& r : replicates) {
      out += fmt::format(
          "<tr><td>{}</td><td>{}</td><td>{}</td><td>{:.6g} {}</td><td>{:.3g}</td><td>{:.2f} %</td>"
          "<td>{:.6g} – {:.6g}</td><td>{}</td><td>{}</td></tr>\n",
          esc(r.group),
          esc(r.result),
          r.n,
          r.mean,
          esc(r.unit),
          r.sd,
          r.rsd_percent,
          r.ci95_low,
          r.ci95_high,
          esc(r.outlier),
          esc(r.acceptance));
    }
    out += "</tbody>\n</table>\n";
  }
  return out + "<footer><p>Written by veq " + esc(version()) +
         ". Each report is a separate page; the same folder always gives the same "
         "pages.</p></footer>\n</body>\n</html>\n";
}

}  // namespace veq::report
