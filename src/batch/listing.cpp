// SPDX-License-Identifier: MIT
// Listing a batch folder: patterns, hidden and temporary files, shards, safe output names.
#include "veq/batch/listing.hpp"

#include <fmt/format.h>
#include <fnmatch.h>
#include <xxhash.h>

#include <algorithm>
#include <charconv>

#include "veq/core/atomic_file.hpp"

namespace veq::batch {

namespace fs = std::filesystem;

std::uint64_t hash64(std::string_view bytes) {
  return XXH3_64bits(bytes.data(), bytes.size());
}

std::string hash_hex(std::uint64_t hash) {
  return fmt::format("{:016x}", hash);
}

Shard parse_shard(std::string_view spec) {
  auto bad = [&](const std::string& why) -> Shard {
    throw InputError({"--shard", 0, 0},
                     "'" + std::string(spec.substr(0, 40)) + "': " + why,
                     "expected I/N with 1 <= I <= N, e.g. --shard 2/4 for the second of four parts");
  };
  const std::size_t slash = spec.find('/');
  if (slash == std::string_view::npos) return bad("missing '/'");
  auto number = [&](std::string_view s, unsigned& out) {
    if (s.empty() || s.size() > 6) return false;
    const auto [p, ec] = std::from_chars(s.data(), s.data() + s.size(), out);
    return ec == std::errc() && p == s.data() + s.size();
  };
  Shard sh;
  if (!number(spec.substr(0, slash), sh.index) || !number(spec.substr(slash + 1), sh.count)) {
    return bad("I and N must be whole numbers");
  }
  if (sh.count < 1 || sh.count > 100000) return bad("N must be within 1-100000");
  if (sh.index < 1 || sh.index > sh.count) return bad("I must be within 1-N");
  return sh;
}

bool in_shard(std::string_view relative_path, const Shard& shard) {
  if (shard.count <= 1) return true;
  return hash64(relative_path) % shard.count == shard.index - 1;
}

std::string output_stem(std::string_view relative_path) {
  std::string s;
  s.reserve(relative_path.size());
  for (const char c : relative_path) {
    const bool safe =
        (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '.' || c == '_' || c == '-';
    s += safe ? c : '_';
  }
  const std::size_t lead = s.find_first_not_of(".-");
  s = lead == std::string::npos ? std::string() : s.substr(lead);
  if (s.size() > 80) s.resize(80);
  if (s.empty()) s = "run";
  return s + "-" + hash_hex(hash64(relative_path));
}

std::vector<std::string> ListOptions::validate() const {
  std::vector<std::string> p;
  if (patterns.empty()) p.emplace_back("patterns: at least one is needed");
  for (const auto& pat : patterns) {
    if (pat.empty()) p.emplace_back("patterns: an empty pattern matches nothing");
  }
  if (shard.count < 1 || shard.index < 1 || shard.index > shard.count) {
    p.push_back(fmt::format("shard = {}/{}: expected 1 <= I <= N", shard.index, shard.count));
  }
  return p;
}

namespace {

bool matches(const std::string& name, const std::string& rel, const std::vector<std::string>& patterns) {
  for (const auto& p : patterns) {
    const bool path_pattern = p.find('/') != std::string::npos;
    const int flags = FNM_CASEFOLD | (path_pattern ? FNM_PATHNAME : 0);
    if (::fnmatch(p.c_str(), path_pattern ? rel.c_str() : name.c_str(), flags) == 0) return true;
  }
  return false;
}

bool same_folder(const fs::path& a, const fs::path& b) {
  std::error_code ec;
  return !b.empty() && fs::equivalent(a, b, ec) && !ec;
}

}  // namespace

Listing list_runs(const fs::path& dir, const ListOptions& options) {
  if (const auto p = options.validate(); !p.empty()) throw InputError({"options", 0, 0}, p.front());
  std::error_code ec;
  const auto st = fs::status(dir, ec);
  if (ec || !fs::exists(st)) {
    throw InputError({dir.string(), 0, 0}, "the folder does not exist", "give the folder that holds the exported runs");
  }
  if (!fs::is_directory(st)) {
    throw InputError({dir.string(), 0, 0}, "this is a file, not a folder", "use 'veq analyze' for a single run");
  }
  Listing out;
  std::vector<std::string> all;
  std::vector<fs::path> pending{dir};
  while (!pending.empty()) {
    const fs::path folder = pending.back();
    pending.pop_back();
    fs::directory_iterator it(folder, ec);
    if (ec) {
      if (folder == dir) {
        throw InputError({dir.string(), 0, 0}, "cannot read the folder: " + ec.message(), "check its permissions");
      }
      out.problems.push_back({"listing", "cannot read the folder: " + ec.message(), {folder.string(), 0, 0}});
      continue;
    }
    for (; it != fs::directory_iterator(); it.increment(ec)) {
      if (ec) break;
      const fs::directory_entry& entry = *it;
      const std::string name = entry.path().filename().string();
      if (name.empty() || name.front() == '.') continue;
      if (name.find(io::kTemporaryMarker) != std::string::npos) continue;
      std::error_code sec;
      const auto link_status = entry.symlink_status(sec);
      if (sec) continue;
      if (fs::is_directory(link_status)) {
        if (options.recursive && !same_folder(entry.path(), options.exclude)) pending.push_back(entry.path());
        continue;
      }
      if (!entry.is_regular_file(sec) || sec) continue;
      const std::string rel = entry.path().lexically_relative(dir).generic_string();
      if (matches(name, rel, options.patterns)) all.push_back(rel);
    }
    if (ec) out.problems.push_back({"listing", "stopped reading the folder: " + ec.message(), {folder.string(), 0, 0}});
  }
  std::sort(all.begin(), all.end());
  out.matched_all_shards = all.size();
  for (auto& rel : all) {
    if (in_shard(rel, options.shard)) out.files.push_back(std::move(rel));
  }
  std::sort(out.problems.begin(), out.problems.end(), [](const Diagnostic& a, const Diagnostic& b) {
    return a.where.file < b.where.file;
  });
  return out;
}

}  // namespace veq::batch
