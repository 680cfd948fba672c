// SPDX-License-Identifier: MIT
// A run's manifest: what resuming compares, and the summary row every listing is rebuilt from.
#pragma once

#include <cstdint>
#include <filesystem>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>

#include "veq/analyze.hpp"
#include "veq/batch/batch.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/summary.hpp"

namespace veq::batch::detail {

using nlohmann::ordered_json;

// x rounded to `decimals` decimals (no "-0"), null when not finite.
[[nodiscard]] ordered_json rounded(double x, int decimals);

// Decimals that show a volume to two significant digits of its uncertainty (2..6).
[[nodiscard]] int decimals_for(double uncertainty_mL);

// The ingest options as one canonical line, for the settings part of the key.
[[nodiscard]] std::string ingest_fingerprint(const ingest::IngestOptions& options);

// A thumbnail for the manifest, and back (the numbers are checked; the SVG is drawn anew from them).
[[nodiscard]] ordered_json thumbnail_json(const report::Thumbnail& thumbnail);
[[nodiscard]] std::optional<report::Thumbnail> thumbnail_from(const ordered_json& j);

// The summary row of an analysed run; sets status (ok, flagged or no_endpoint).
[[nodiscard]] ordered_json analysed_row(const Analysis& analysis, RunStatus& status);
// The summary row of a run that gave no analysis.
[[nodiscard]] ordered_json failed_row(RunStatus status, const std::string& error);
// An input error as one line: what() and the hint.
[[nodiscard]] std::string error_text(const InputError& e);

// What a run's result depends on, compared with an earlier manifest.
struct ManifestKey {
  std::string file;         // relative path
  std::string source_xxh3;  // empty when the file was not read (too large)
  std::uint64_t source_bytes = 0;
  std::string method;
  std::string settings;
  bool html = true;
};

// Whether an earlier manifest still stands: same key, same veq version, a
// known status, and every output it lists (runs_dir/<stem>.json, .html) with the bytes it recorded.
[[nodiscard]] bool still_valid(const ordered_json& manifest,
                               const ManifestKey& key,
                               const std::filesystem::path& runs_dir,
                               const std::string& stem);

// Whether the record of a run no longer listed is kept in the journal: it is this version's manifest of
// that stem and names result files that are all still in runs_dir (none named: not kept).
[[nodiscard]] bool keeps_unlisted(const ordered_json& manifest,
                                  const std::filesystem::path& runs_dir,
                                  const std::string& stem);

// The names of a run's result and report in runs/.
[[nodiscard]] std::string result_name(const std::string& stem);
[[nodiscard]] std::string report_name(const std::string& stem);

// Text indented by `by` on every line (summary.json entries sit inside "runs").
[[nodiscard]] std::string indent(const std::string& text, std::string_view by);

// The listing row and the summary.json entry of a run, from its summary row
// and (when it has one) its manifest. stem names its files in runs/.
[[nodiscard]] report::SummaryRow row_from(const ordered_json& row,
                                          const std::string& rel,
                                          const std::string& stem,
                                          const ordered_json* manifest);
[[nodiscard]] ordered_json json_entry(const ordered_json& row,
                                      const std::string& rel,
                                      const std::string& stem,
                                      const ordered_json* manifest);

}  // namespace veq::batch::detail
