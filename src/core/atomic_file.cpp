// SPDX-License-Identifier: MIT
// Atomic file output (POSIX): temp file in the target's directory, fsync, rename.
#include "veq/core/atomic_file.hpp"

#include <fcntl.h>
#include <stdio.h>
#include <sys/stat.h>
#include <unistd.h>

#include <atomic>
#include <cerrno>
#include <cstring>
#include <string>

#include "veq/core/error.hpp"

namespace veq::io {
namespace {

std::atomic<unsigned long> g_counter{0};

[[noreturn]] void fail(const std::filesystem::path& target, const std::string& what, int err) {
  throw InputError({target.string(), 0, 0},
                   "cannot write output: " + what + ": " + std::strerror(err),
                   "check that the folder exists, is writable and has free space");
}

}  // namespace

AtomicFile::AtomicFile(std::filesystem::path target, bool allow_replace, Sync sync)
    : m_target(std::move(target)), m_allow_replace(allow_replace), m_sync(sync) {
  const std::string name = m_target.filename().string();
  for (int attempt = 0; attempt < 100 && m_fd < 0; ++attempt) {
    m_temp = m_target;
    m_temp.replace_filename(name + std::string(kTemporaryMarker) + std::to_string(::getpid()) +
                            "-" + std::to_string(g_counter.fetch_add(1)));
    m_fd = ::open(m_temp.c_str(), O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
    if (m_fd < 0 && errno != EEXIST) fail(m_target, "cannot create a temporary file", errno);
  }
  if (m_fd < 0) fail(m_target, "cannot create a temporary file", EEXIST);
}

AtomicFile::~AtomicFile() {
  if (m_fd >= 0) ::close(m_fd);
  if (!m_committed) ::unlink(m_temp.c_str());
}

void AtomicFile::write(std::string_view data) {
  while (!data.empty()) {
    const ssize_t n = ::write(m_fd, data.data(), data.size());
    if (n < 0) {
      if (errno == EINTR) continue;
      fail(m_target, "write failed", errno);
    }
    data.remove_prefix(static_cast<std::size_t>(n));
  }
}

void AtomicFile::commit() {
  if (m_committed) return;
  if (m_sync == Sync::now && ::fsync(m_fd) != 0 && errno != EINVAL) fail(m_target, "sync failed", errno);
  if (::close(m_fd) != 0) {
    m_fd = -1;
    fail(m_target, "close failed", errno);
  }
  m_fd = -1;
  if (m_allow_replace) {
    if (::rename(m_temp.c_str(), m_target.c_str()) != 0) fail(m_target, "rename failed", errno);
  } else {
    // link() fails atomically with EEXIST when the target is there: an existing
    // result is never replaced without an explicit request.
    if (::link(m_temp.c_str(), m_target.c_str()) != 0) {
      const int err = errno;
      if (err == EEXIST) {
        throw InputError({m_target.string(), 0, 0},
                         "output file already exists; not replacing it",
                         "choose another name, remove the file, or pass --force");
      }
      fail(m_target, "cannot move the result into place", err);
    }
    ::unlink(m_temp.c_str());
  }
  m_committed = true;
}

void write_file_atomically(const std::filesystem::path& target,
                           std::string_view content,
                           bool allow_replace,
                           Sync sync) {
  AtomicFile file(target, allow_replace, sync);
  file.write(content);
  file.commit();
}

}  // namespace veq::io
