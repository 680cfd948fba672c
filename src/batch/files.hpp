// SPDX-License-Identifier: MIT
// The batch's file handling: the output folder's lock, the log, reading sources whole, sweeping temporaries.
#pragma once

#include <cstdint>
#include <filesystem>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>
#include <string_view>
#include <unordered_map>
#include <vector>

namespace veq::batch::detail {

// Local time with milliseconds, for the log only.
[[nodiscard]] std::string local_time_now();

// The folder's lock and ownership mark (kLockFile), held for the whole
// batch; the kernel releases it when the process ends, however it ends.
// Throws InputError when the folder cannot be used or another batch holds it.
class FolderLock {
 public:
  explicit FolderLock(const std::filesystem::path& dir);
  FolderLock(const FolderLock&) = delete;
  FolderLock& operator=(const FolderLock&) = delete;
  ~FolderLock();
  [[nodiscard]] int fd() const { return m_fd; }

 private:
  int m_fd = -1;
};

// batch.log: appended a whole line per write (O_APPEND), so a killed batch
// leaves a log that ends at its last complete line. The only output with
// times in it. Thread-safe; a log that cannot be written never stops a batch.
class Log {
 public:
  explicit Log(const std::filesystem::path& path);
  Log(const Log&) = delete;
  Log& operator=(const Log&) = delete;
  ~Log();
  void line(const std::string& text);

 private:
  int m_fd = -1;
  std::mutex m_mutex;
};

// runs/manifests.jsonl: every run's manifest as one line, appended (O_APPEND, one write a line) as the runs
// finish; the latest line of a stem stands. One file instead of a folder and a manifest file a run: creating
// files is most of the kernel's time in a batch. A line cut short by a kill (no newline after it) is cut off
// when the journal is opened, so that the next append starts a line of its own; a line that does not start
// with {"stem":"...", is ignored (counted in dropped()). Memory: a stem, an offset and a length a run.
// Thread-safe.
class Journal {
 public:
  // Opens (creates) the journal; throws InputError when it cannot be opened or read.
  explicit Journal(const std::filesystem::path& path);
  Journal(const Journal&) = delete;
  Journal& operator=(const Journal&) = delete;
  ~Journal();

  // The latest record of stem (without its newline); nullopt when there is none or it cannot be read.
  [[nodiscard]] std::optional<std::string> find(const std::string& stem) const;
  // Appends a record for stem: one line, which must start with {"stem":"<stem>" and hold no newline.
  // Throws InputError when it cannot be written whole (the journal is then cut back to where it was).
  void append(const std::string& stem, std::string_view record);
  // Every stem that has a record, sorted.
  [[nodiscard]] std::vector<std::string> stems() const;
  // Lines found unusable when the journal was opened, and whether a cut-short last line was removed.
  [[nodiscard]] std::size_t dropped() const { return m_dropped; }
  [[nodiscard]] bool cut_short() const { return m_cut_short; }
  [[nodiscard]] const std::filesystem::path& path() const { return m_path; }

  // The stem a record names: the string after {"stem":" up to the next quote; empty when not so.
  [[nodiscard]] static std::string_view stem_of(std::string_view record);

 private:
  struct Where {
    std::uint64_t offset = 0;
    std::uint64_t length = 0;
  };
  std::filesystem::path m_path;
  int m_fd = -1;
  std::uint64_t m_size = 0;
  std::unordered_map<std::string, Where> m_index;
  std::size_t m_dropped = 0;
  bool m_cut_short = false;
  mutable std::mutex m_mutex;
};

// A file read whole, or why it could not be.
struct Source {
  enum class State { ok, missing, too_large, unreadable } state = State::ok;
  std::string bytes;
  std::uint64_t size = 0;  // [bytes]
  std::string message;     // why, when not ok
};

// Reads a regular file of at most max_bytes. Opened non-blocking, so a FIFO
// put in a file's place cannot hang a worker; a file that is gone or no
// longer a regular file is `missing`.
[[nodiscard]] Source read_source(const std::filesystem::path& path, std::uint64_t max_bytes);

// XXH3-64 of a file's bytes in hex; empty when it cannot be read.
[[nodiscard]] std::string hash_of_file(const std::filesystem::path& path);

// Removes the temporaries (io::kTemporaryMarker in the name) a killed batch
// left in dir, not recursively; returns how many.
std::size_t sweep_temporaries(const std::filesystem::path& dir);

// Removes the run folders (runs/<stem>/ with a manifest.json) of the layout before the manifest journal;
// their runs have no record in the journal and are done again. Returns how many.
std::size_t remove_folder_layout(const std::filesystem::path& runs_dir);

}  // namespace veq::batch::detail
