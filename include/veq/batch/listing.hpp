// SPDX-License-Identifier: MIT
// Which files of a folder a batch runs, how a folder is split into shards, and per-run output names.
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include "veq/core/error.hpp"

namespace veq::batch {

// Part I of N of a folder (1-based): a run belongs to the shard when
// XXH3-64(relative path) mod N = I - 1. Every run is in exactly one shard,
// whatever the machine, and adding files never moves others between shards.
struct Shard {
  unsigned index = 1;  // I, 1..count
  unsigned count = 1;  // N >= 1
};

// Parses "I/N" with 1 <= I <= N <= 100000. Throws InputError (source
// "--shard") otherwise.
[[nodiscard]] Shard parse_shard(std::string_view spec);

// Whether the run at relative_path ('/'-separated, as list_runs gives it)
// belongs to the shard.
[[nodiscard]] bool in_shard(std::string_view relative_path, const Shard& shard);

// The stem of a run's output files: the relative path with every byte other
// than A-Z a-z 0-9 . _ - replaced by '_' (so '/' and '..' cannot leave the
// output folder), leading dots and dashes dropped, cut to 80 bytes, then '-'
// and 16 hex digits of XXH3-64 of the whole relative path, which makes the
// name unique even when two paths sanitise alike. Stable across runs and
// machines.
[[nodiscard]] std::string output_stem(std::string_view relative_path);

// XXH3-64 of bytes, the hash behind shards, names and resumability.
[[nodiscard]] std::uint64_t hash64(std::string_view bytes);
// The same as 16 lower-case hex digits.
[[nodiscard]] std::string hash_hex(std::uint64_t hash);

struct ListOptions {
  // File-name patterns (fnmatch, case-insensitive); a pattern holding '/' is
  // matched against the whole relative path instead.
  std::vector<std::string> patterns = {"*.csv", "*.txt", "*.tsv"};
  // Also look in subfolders (symbolic links to folders are not followed).
  bool recursive = false;
  Shard shard;
  // A folder never listed (the batch's output folder when it lies inside
  // the input folder).
  std::filesystem::path exclude;

  [[nodiscard]] std::vector<std::string> validate() const;
};

struct Listing {
  std::vector<std::string> files;      // relative, '/'-separated, sorted by bytes; this shard only
  std::size_t matched_all_shards = 0;  // files matched before the shard filter
  std::vector<Diagnostic> problems;    // subfolders that could not be read, and the like
};

// The runs in dir: regular files (or links to them) whose names match a
// pattern; names starting with '.' and veq's own temporary files are left
// out. Throws InputError when dir is not a readable folder.
[[nodiscard]] Listing list_runs(const std::filesystem::path& dir, const ListOptions& options = {});

}  // namespace veq::batch
