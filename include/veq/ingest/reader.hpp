// SPDX-License-Identifier: MIT
// Reading exported pH- or mV-versus-volume logs as instruments and people write them.
#pragma once

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "veq/core/expected.hpp"
#include "veq/core/run.hpp"

namespace veq::ingest {

// Column positions given by the user, 1-based as a spreadsheet shows them.
struct ColumnOverrides {
  std::optional<std::size_t> volume;
  std::optional<std::size_t> signal;
  std::optional<std::size_t> temperature;
  std::optional<std::size_t> time;
};

struct IngestOptions {
  // Files larger than this are refused before reading [bytes].
  std::uint64_t max_file_bytes = std::uint64_t{64} << 20;
  // Inputs up to this size are decoded whole and split in memory; larger
  // ones stream through fast-cpp-csv-parser's LineReader (a 48 MiB window).
  // Both give the same Run [bytes].
  std::uint64_t whole_file_limit_bytes = std::uint64_t{8} << 20;
  // Any single line longer than this is an error [bytes].
  std::size_t max_line_bytes = std::size_t{1} << 20;
  // --columns: positions that override header recognition.
  ColumnOverrides columns;
  // --volume-unit: "mL", "uL" or "L"; overrides the header's unit.
  std::optional<std::string> volume_unit;
  // --signal: what the signal column holds when the header does not say.
  std::optional<SignalKind> signal;
  // --sort: accept rows out of volume order and sort them (stable).
  bool sort_by_volume = false;
  // Readings accepted as pH [pH] and as potential [mV]; outside is an error.
  double min_pH = -2.0;
  double max_pH = 16.0;
  double max_abs_mV = 2000.0;

  // One line per problem ("max_file_bytes = 0: must be positive"); empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// Reads one exported log. Throws veq::InputError naming the file, line and
// column of the first problem, with what was found and what was expected;
// never returns a partial run.
[[nodiscard]] Run read_run(const std::filesystem::path& path, const IngestOptions& options = {});

// The same from bytes already in memory; source_name is used in messages.
[[nodiscard]] Run parse_run(std::string_view bytes,
                            const std::string& source_name,
                            const IngestOptions& options = {});

// Value-or-error forms of the two above.
[[nodiscard]] Expected<Run> try_read_run(const std::filesystem::path& path,
                                         const IngestOptions& options = {});
[[nodiscard]] Expected<Run> try_parse_run(std::string_view bytes,
                                          const std::string& source_name,
                                          const IngestOptions& options = {});

// Parses "volume=2,signal=4[,temperature=3][,time=1]" (1-based). Throws
// InputError (source "--columns") on anything else.
[[nodiscard]] ColumnOverrides parse_column_overrides(std::string_view spec);

}  // namespace veq::ingest
