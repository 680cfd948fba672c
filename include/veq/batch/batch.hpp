// SPDX-License-Identifier: MIT
// The overnight batch: every run of a folder, in parallel, resumable, with atomic outputs and summaries.
#pragma once

#include <array>
#include <cstddef>
#include <filesystem>
#include <functional>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "veq/analyze.hpp"
#include "veq/batch/listing.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/summary.hpp"

namespace veq::batch {

// How a run ended. The numbers are stable and never reused; the names (to_string)
// are what summary.csv, summary.json and the manifests say.
enum class RunStatus : int {
  ok = 0,              // analysed; at least one endpoint, none flagged
  flagged = 1,         // analysed; at least one endpoint carries a quality flag
  no_endpoint = 2,     // analysed; no endpoint found
  input_error = 3,     // the file is not a readable titration log (the error says where and why)
  missing = 4,         // listed, but gone or not a regular file when its turn came
  output_error = 5,    // its results could not be written (disk full, permissions)
  internal_error = 6,  // a bug in veq while processing it
  not_run = 7,         // the batch was stopped before it
  no_result = 8,       // endpoints found, but the method's result could not be computed or failed acceptance
  out_of_spec = 9,     // a result outside the method's specification limits (verdict "fail")
};
inline constexpr std::size_t kStatusCount = 10;
[[nodiscard]] std::string_view to_string(RunStatus status);
[[nodiscard]] std::optional<RunStatus> status_from_string(std::string_view name);
// Every status other than ok and flagged counts as failed (exit code 1).
[[nodiscard]] bool is_failure(RunStatus status);

struct BatchOptions {
  std::filesystem::path input_dir;
  std::filesystem::path output_dir;
  ListOptions list;
  // Worker threads; 0: the hardware threads.
  unsigned jobs = 0;
  // Redo every run, even those whose source, method, settings and veq version
  // are unchanged; also accept an output folder veq batch did not create.
  bool force = false;
  // Write an HTML report per run (JSON and manifest are always written).
  bool html_reports = true;
  // The method the runs are analysed under, as an identity (the method
  // file's content hash, method::Method::identity); empty: none. Recorded in
  // every manifest and summary, and part of the resumability key. The method
  // itself reaches each run through configure().
  std::string method_identity;
  // Replicates: runs with results are grouped by sample id, or by the first
  // capture of this regular expression on the file name (empty: sample id);
  // groups of two or more get statistics in summary.json, replicates.csv and
  // index.html. max_rsd_percent, when set, is the method's acceptance limit.
  std::string replicate_pattern;
  std::optional<double> max_rsd_percent;
  // Everything else that changes a result (command-line facts and options),
  // as an opaque fingerprint; part of the resumability key.
  std::string settings_identity;
  ingest::IngestOptions ingest;
  // Called in a worker for each run read, before analysis: applies facts
  // given outside the file and returns the analysis options for it. May throw
  // InputError (the run then fails with that message). Empty: defaults.
  std::function<AnalyzeOptions(Run& run)> configure;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

struct Progress {
  std::size_t done = 0;    // runs finished (processed or resumed)
  std::size_t total = 0;   // runs to do in this batch
  double elapsed_s = 0.0;  // [s] since the runs started
};

struct BatchHooks {
  // Polled before a worker takes a new run; true stops the batch after the
  // runs in flight (the rest are reported not_run). Must be thread-safe.
  std::function<bool()> stop_requested;
  // Called on the calling thread about five times a second while runs are in
  // flight, and once at the end.
  std::function<void(const Progress&)> progress;
  // Called in the worker just before a run's file is opened (tests use it to
  // make a file disappear mid-batch). Must be thread-safe.
  std::function<void(const std::string& relative_path)> before_run;
};

struct BatchSummary {
  std::size_t listed = 0;     // runs in this batch (this shard)
  std::size_t processed = 0;  // analysed (or failed) in this invocation
  std::size_t resumed = 0;    // skipped: unchanged since an earlier batch wrote their results
  std::size_t replaced =
      0;  // processed although earlier results existed (source, method, settings or veq changed, or --force)
  std::array<std::size_t, kStatusCount> counts{};  // runs per status, indexed by the status number
  bool stopped = false;                            // stop_requested() ended the batch early
  double elapsed_s = 0.0;                          // [s] wall time of the whole batch
  std::vector<Diagnostic> problems;                // listing problems (also in errors.txt)
  std::filesystem::path index_html;                // where the listing was written
  std::size_t replicate_failures = 0;              // replicate groups above the method's RSD limit

  [[nodiscard]] std::size_t count(RunStatus s) const { return counts[static_cast<std::size_t>(s)]; }
  [[nodiscard]] std::size_t failed() const;
};

// The summary row of one analysed run and its status, as veq batch lists it
// (used by the upload page too, so that its table says the same).
[[nodiscard]] report::SummaryRow summary_row_of(const Analysis& analysis, const std::string& file, RunStatus& status);

// Runs every file of the folder (this shard) on `jobs` threads and writes, in
// output_dir: runs/<stem>.json and runs/<stem>.html per run (stem from
// output_stem()), each run's manifest as a line of runs/manifests.jsonl, then
// summary.csv, summary.json, index.html and errors.txt, rebuilt from the
// manifests in the order of relative paths, so the same folder gives the same
// bytes whatever the thread timing or earlier interruptions (the journal is
// rewritten in that order at the end); and appends to batch.log (the one file
// with times in it). Every output file but the journal is written to a
// temporary name and renamed; the journal is appended a whole line at a time,
// and a line cut short by a kill is dropped. A run whose manifest shows the
// same source content hash, method, settings and veq version, and whose
// outputs are intact, is not redone unless force. One file's failure is its
// own status, never the batch's.
//
// Throws InputError for problems of the batch as a whole: the input folder
// cannot be listed, the output folder cannot be created or holds files veq
// did not write (unless force), another batch is writing to it, the summaries
// cannot be written.
[[nodiscard]] BatchSummary run_batch(const BatchOptions& options, const BatchHooks& hooks = {});

// Names of the files in output_dir (stable; documented in the README). Each
// run's result and report are runs/<stem>.json and runs/<stem>.html (stem from
// output_stem(): it ends in "-" and 16 hex digits, so no stem is the journal's name).
inline constexpr std::string_view kRunsFolder = "runs";
inline constexpr std::string_view kResultExtension = ".json";
inline constexpr std::string_view kReportExtension = ".html";
inline constexpr std::string_view kManifestJournal = "manifests.jsonl";
inline constexpr std::string_view kSummaryCsv = "summary.csv";
inline constexpr std::string_view kReplicatesCsv = "replicates.csv";
inline constexpr std::string_view kSummaryJson = "summary.json";
inline constexpr std::string_view kIndexHtml = "index.html";
inline constexpr std::string_view kErrorsTxt = "errors.txt";
inline constexpr std::string_view kLogFile = "batch.log";
// Marks a folder as a batch's output and serialises batches writing to it (flock).
inline constexpr std::string_view kLockFile = ".veq-batch";
// Schemas of summary.json and of a run's manifest.
inline constexpr std::string_view kBatchSchema = "veq.batch/1";
inline constexpr std::string_view kManifestSchema = "veq.batch-run/2";

}  // namespace veq::batch
