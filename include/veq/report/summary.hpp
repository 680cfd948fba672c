// SPDX-License-Identifier: MIT
// Listings of many runs: the rows of summary.csv and the pieces of a batch's index.html.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "veq/report/html.hpp"

namespace veq::report {

// What a listing shows for one run. Every field is plain text (not escaped);
// the writers below escape for their format.
struct SummaryRow {
  std::string id;                      // sample id; empty when the file could not be read
  std::string file;                    // path relative to the batch folder, '/' separated
  std::string status;                  // stable status name ("ok", "input_error", ...)
  int endpoints = 0;                   // endpoints found
  std::string result;                  // "18.7403 +/- 0.0039 mL; ..." (volume +/- standard uncertainty)
  std::string flags;                   // "EP1 noisy edge; EP2 methods_disagree"
  std::string error;                   // why the run failed or gave nothing; empty otherwise
  std::string report_href;             // relative link to the run's HTML report; empty: none
  std::optional<Thumbnail> thumbnail;  // none when the file could not be read
};

// One CSV field (RFC 4180): enclosed in double quotes, inner quotes doubled,
// when it holds a comma, a quote, CR or LF. A field starting with '=', '+',
// '-', '@', a tab or CR first gets a leading apostrophe, so that a
// spreadsheet shows it as text instead of evaluating it (formula injection;
// OWASP, "CSV Injection"). Invalid UTF-8 becomes U+FFFD.
[[nodiscard]] std::string csv_field(std::string_view text);

// The header line of summary.csv: id,file,status,endpoints,result,flags,error
// (CRLF line ends, as RFC 4180 specifies).
[[nodiscard]] std::string summary_csv_header();
[[nodiscard]] std::string summary_csv_row(const SummaryRow& row);

// What index.html says about the batch as a whole.
struct IndexInfo {
  std::string input;                                        // the folder as given
  std::string method;                                       // method identity; empty: none
  std::string shard;                                        // "I/N"; empty: the whole folder
  std::vector<std::pair<std::string, std::size_t>> counts;  // status name -> runs, in a stable order
  std::size_t total = 0;
};

// index.html is written in three parts so that a batch of any size streams it:
// index_html_begin(), then index_html_row() for each run in order, then
// index_html_end(). Self-contained (inline CSS and SVG, no script); every text
// escaped.
[[nodiscard]] std::string index_html_begin(const IndexInfo& info);
[[nodiscard]] std::string index_html_row(const SummaryRow& row, std::size_t number);
// Replicate statistics of one group and result, for the index.
struct ReplicateRow {
  std::string group, result, unit;
  std::size_t n = 0;
  double mean = 0, sd = 0, rsd_percent = 0, ci95_low = 0, ci95_high = 0;
  std::string outlier;     // file of the suspect value (flagged, kept); empty: none
  std::string acceptance;  // "passed", "failed", or "" without a limit
};
// Closes the listing; replicate statistics, when there are any, follow it.
[[nodiscard]] std::string index_html_end(const std::vector<ReplicateRow>& replicates = {});

}  // namespace veq::report
