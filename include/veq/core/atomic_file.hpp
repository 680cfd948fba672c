// SPDX-License-Identifier: MIT
// Atomic file output: write to a temporary name, then commit by renaming into place.
#pragma once

#include <filesystem>
#include <string>
#include <string_view>

namespace veq::io {

// When a committed file reaches the disk. `now`: fsync before the rename, so
// the result survives a power cut once commit() returns. `deferred`: no fsync;
// the file is still whole or absent after the process is killed (the kernel
// keeps written data), and the caller syncs the whole folder later (a batch
// syncs once at the end and verifies per-run outputs by hash on resume).
enum class Sync { now, deferred };

// A file that appears at its target path only when commit() succeeds, whole.
// Until then the data lives in a temporary file beside the target (same
// directory, so the final rename is atomic); the destructor removes that
// temporary if commit() was never called, so an exception thrown mid-write
// leaves any existing target untouched. There is deliberately no commit in
// the destructor.
//
// Errors (cannot create, disk full, target exists and replacing was not
// allowed) throw veq::InputError naming the target path.
class AtomicFile {
 public:
  // allow_replace: when false, commit() fails if the target already exists.
  explicit AtomicFile(std::filesystem::path target, bool allow_replace = false, Sync sync = Sync::now);
  AtomicFile(const AtomicFile&) = delete;
  AtomicFile& operator=(const AtomicFile&) = delete;
  ~AtomicFile();

  void write(std::string_view data);
  // Flushes, syncs and renames the temporary into place. Call once.
  void commit();

  [[nodiscard]] const std::filesystem::path& target() const { return m_target; }
  [[nodiscard]] const std::filesystem::path& temporary() const { return m_temp; }

 private:
  std::filesystem::path m_target;
  std::filesystem::path m_temp;
  int m_fd = -1;
  bool m_allow_replace = false;
  Sync m_sync = Sync::now;
  bool m_committed = false;
};

// The marker every temporary name carries, so that a resumed batch can sweep
// leftovers of a killed one.
inline constexpr std::string_view kTemporaryMarker = ".veq-tmp-";

// Writes content to target atomically (see AtomicFile).
void write_file_atomically(const std::filesystem::path& target,
                           std::string_view content,
                           bool allow_replace,
                           Sync sync = Sync::now);

}  // namespace veq::io
