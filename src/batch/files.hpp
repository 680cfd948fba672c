// SPDX-License-Identifier: MIT
// The batch's file handling: the output folder's lock, the log, reading sources whole, sweeping temporaries.
#pragma once

#include <cstdint>
#include <filesystem>
#include <mutex>
#include <nlohmann/json.hpp>
#include <optional>
#include <string>

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

// A JSON object read from a file (at most 16 MiB); nullopt when absent or not an object.
[[nodiscard]] std::optional<nlohmann::ordered_json> read_json(const std::filesystem::path& path);

// Removes the temporaries (io::kTemporaryMarker in the name) a killed batch
// left in dir, not recursively; returns how many.
std::size_t sweep_temporaries(const std::filesystem::path& dir);

}  // namespace veq::batch::detail
