// SPDX-License-Identifier: MIT
// The batch's file handling (POSIX): flock, O_APPEND log, whole-file reads, temporaries.
#include "batch/files.hpp"

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <cerrno>
#include <chrono>
#include <cstring>
#include <ctime>
#include <stdexcept>

#include "veq/batch/batch.hpp"
#include "veq/batch/listing.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/core/error.hpp"

namespace veq::batch::detail {

namespace fs = std::filesystem;

std::string local_time_now() {
  const auto now = std::chrono::system_clock::now();
  const std::time_t t = std::chrono::system_clock::to_time_t(now);
  std::tm tm{};
  localtime_r(&t, &tm);
  char buf[32];
  std::strftime(buf, sizeof buf, "%Y-%m-%d %H:%M:%S", &tm);
  const auto ms = std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  return fmt::format("{}.{:03d}", buf, static_cast<int>(ms));
}

FolderLock::FolderLock(const fs::path& dir) {
  const fs::path p = dir / kLockFile;
  m_fd = ::open(p.c_str(), O_RDWR | O_CREAT | O_CLOEXEC, 0644);
  if (m_fd < 0) {
    throw InputError({dir.string(), 0, 0},
                     std::string("cannot use the output folder: ") + std::strerror(errno),
                     "check that it is writable");
  }
  if (::flock(m_fd, LOCK_EX | LOCK_NB) != 0) {
    ::close(m_fd);
    throw InputError({dir.string(), 0, 0},
                     "another veq batch is writing to this output folder",
                     "wait for it to finish, or choose another --out folder");
  }
}

FolderLock::~FolderLock() {
  ::close(m_fd);
}

Log::Log(const fs::path& path) {
  m_fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
}

Log::~Log() {
  if (m_fd >= 0) ::close(m_fd);
}

void Log::line(const std::string& text) {
  if (m_fd < 0) return;
  std::string l = local_time_now() + "  " + text;
  std::replace(l.begin(), l.end(), '\n', ' ');
  l += '\n';
  const std::lock_guard<std::mutex> lock(m_mutex);
  const ssize_t n = ::write(m_fd, l.data(), l.size());
  (void)n;  // a log that cannot be written never stops the batch
}

namespace {
constexpr std::string_view kStemPrefix = "{\"stem\":\"";
}  // namespace

std::string_view Journal::stem_of(std::string_view record) {
  if (record.substr(0, kStemPrefix.size()) != kStemPrefix) return {};
  record.remove_prefix(kStemPrefix.size());
  const std::size_t end = record.find('"');
  if (end == std::string_view::npos || end == 0) return {};
  return record.substr(0, end);
}

Journal::Journal(const fs::path& path) : m_path(path) {
  m_fd = ::open(path.c_str(), O_RDWR | O_CREAT | O_APPEND | O_CLOEXEC, 0644);
  if (m_fd < 0) {
    throw InputError({path.string(), 0, 0},
                     std::string("cannot open the batch's manifest journal: ") + std::strerror(errno),
                     "check that the output folder is writable");
  }
  // One pass in blocks: where each line starts, its length, and the first bytes (enough for the stem).
  constexpr std::size_t kBlock = std::size_t{1} << 20;
  constexpr std::size_t kHead = 200;  // stems are at most 97 characters
  std::vector<char> block(kBlock);
  std::string head;
  std::uint64_t line_start = 0, pos = 0;
  auto line_done = [&](std::uint64_t end) {
    const std::string_view stem = stem_of(head);
    if (stem.empty()) {
      ++m_dropped;
    } else {
      m_index[std::string(stem)] = {line_start, end - line_start};
    }
    head.clear();
    line_start = end + 1;
  };
  for (;;) {
    const ssize_t n = ::pread(m_fd, block.data(), block.size(), static_cast<off_t>(pos));
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      const int err = errno;
      ::close(m_fd);
      throw InputError({path.string(), 0, 0},
                       std::string("cannot read the batch's manifest journal: ") + std::strerror(err));
    }
    if (n == 0) break;
    for (ssize_t i = 0; i < n; ++i) {
      const char c = block[static_cast<std::size_t>(i)];
      if (c == '\n') {
        line_done(pos + static_cast<std::uint64_t>(i));
      } else if (head.size() < kHead) {
        head += c;
      }
    }
    pos += static_cast<std::uint64_t>(n);
  }
  m_size = line_start;
  if (pos > line_start) {
    // A last line without its newline: a write cut short by a kill. Cut off, so that appends start a line.
    if (::ftruncate(m_fd, static_cast<off_t>(line_start)) != 0) {
      const int err = errno;
      ::close(m_fd);
      throw InputError({path.string(), 0, 0},
                       std::string("cannot repair the batch's manifest journal: ") + std::strerror(err));
    }
    m_cut_short = true;
  }
}

Journal::~Journal() {
  if (m_fd >= 0) ::close(m_fd);
}

std::optional<std::string> Journal::find(const std::string& stem) const {
  Where w;
  {
    const std::lock_guard<std::mutex> lock(m_mutex);
    const auto it = m_index.find(stem);
    if (it == m_index.end()) return std::nullopt;
    w = it->second;
  }
  std::string text(static_cast<std::size_t>(w.length), '\0');
  std::size_t got = 0;
  while (got < text.size()) {
    const ssize_t n = ::pread(m_fd, text.data() + got, text.size() - got, static_cast<off_t>(w.offset + got));
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return std::nullopt;
    got += static_cast<std::size_t>(n);
  }
  return text;
}

void Journal::append(const std::string& stem, std::string_view record) {
  if (stem_of(record) != stem || record.find('\n') != std::string_view::npos) {
    throw std::logic_error("a journal record must start with its stem and hold no newline");
  }
  std::string line(record);
  line += '\n';
  const std::lock_guard<std::mutex> lock(m_mutex);
  std::size_t put = 0;
  while (put < line.size()) {
    const ssize_t n = ::write(m_fd, line.data() + put, line.size() - put);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      const int err = n < 0 ? errno : ENOSPC;
      // Nothing half-written stays: the next record starts where this one would have.
      // (Should that fail too, the next record follows the cut-short bytes on their line: it is found
      // here by its own offset, and the next opening ignores the line.)
      if (put > 0 && ::ftruncate(m_fd, static_cast<off_t>(m_size)) != 0) m_size += put;
      throw InputError({m_path.string(), 0, 0},
                       std::string("cannot write the run's manifest: ") + std::strerror(err),
                       "check the free space of the output folder");
    }
    put += static_cast<std::size_t>(n);
  }
  m_index[stem] = {m_size, record.size()};
  m_size += line.size();
}

std::vector<std::string> Journal::stems() const {
  const std::lock_guard<std::mutex> lock(m_mutex);
  std::vector<std::string> v;
  v.reserve(m_index.size());
  for (const auto& [stem, w] : m_index) v.push_back(stem);
  std::sort(v.begin(), v.end());
  return v;
}

Source read_source(const fs::path& path, std::uint64_t max_bytes) {
  Source s;
  // O_NONBLOCK: a file replaced by a FIFO after listing must not hang a worker.
  const int fd = ::open(path.c_str(), O_RDONLY | O_NONBLOCK | O_CLOEXEC);
  if (fd < 0) {
    const int err = errno;
    s.state = err == ENOENT || err == ENOTDIR ? Source::State::missing : Source::State::unreadable;
    s.message = err == ENOENT || err == ENOTDIR ? "the file was listed but no longer exists"
                                                : std::string("cannot open the file: ") + std::strerror(err);
    return s;
  }
  struct stat st {};
  if (::fstat(fd, &st) != 0 || !S_ISREG(st.st_mode)) {
    ::close(fd);
    s.state = Source::State::missing;
    s.message = "the file was listed but is no longer a regular file";
    return s;
  }
  s.size = static_cast<std::uint64_t>(st.st_size);
  if (s.size > max_bytes) {
    ::close(fd);
    s.state = Source::State::too_large;
    s.message = fmt::format(
        "file is {:.1f} MiB; the limit is {} MiB", static_cast<double>(s.size) / 1048576.0, max_bytes >> 20);
    return s;
  }
  // Read the size fstat gave, then probe for more: a file still growing is read
  // on up to the limit and no further.
  s.bytes.resize(static_cast<std::size_t>(s.size));
  std::size_t got = 0;
  char probe[4096];
  for (;;) {
    const bool into_buffer = got < s.bytes.size();
    const ssize_t n =
        into_buffer ? ::read(fd, s.bytes.data() + got, s.bytes.size() - got) : ::read(fd, probe, sizeof probe);
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      const int err = errno;
      ::close(fd);
      s.state = Source::State::unreadable;
      s.message = std::string("read error: ") + std::strerror(err);
      return s;
    }
    if (n == 0) break;
    if (!into_buffer) {
      s.bytes.resize(got);
      s.bytes.append(probe, static_cast<std::size_t>(n));
    }
    got += static_cast<std::size_t>(n);
    if (got > max_bytes) break;
  }
  ::close(fd);
  s.bytes.resize(got);
  s.size = got;
  if (got > max_bytes) {
    s.state = Source::State::too_large;
    s.message = fmt::format("file grew past the {} MiB limit while being read", max_bytes >> 20);
  }
  return s;
}

std::string hash_of_file(const fs::path& p) {
  Source s = read_source(p, std::uint64_t{1} << 34);
  if (s.state != Source::State::ok) return {};
  return hash_hex(hash64(s.bytes));
}

// Removes temporaries a killed batch left in dir (not recursive); returns how many.
std::size_t sweep_temporaries(const fs::path& dir) {
  std::error_code ec;
  std::size_t n = 0;
  for (fs::directory_iterator it(dir, ec), end; !ec && it != end; it.increment(ec)) {
    const std::string name = it->path().filename().string();
    if (name.find(io::kTemporaryMarker) == std::string::npos) continue;
    std::error_code rec;
    if (fs::remove(it->path(), rec)) ++n;
  }
  return n;
}

}  // namespace veq::batch::detail

namespace veq::batch::detail {

std::size_t remove_folder_layout(const fs::path& runs_dir) {
  std::error_code ec;
  std::vector<fs::path> old;
  for (fs::directory_iterator it(runs_dir, ec), end; !ec && it != end; it.increment(ec)) {
    std::error_code dec;
    if (it->is_directory(dec) && fs::exists(it->path() / "manifest.json", dec)) old.push_back(it->path());
  }
  std::size_t n = 0;
  for (const auto& d : old) {
    std::error_code rec;
    if (fs::remove_all(d, rec) != static_cast<std::uintmax_t>(-1) && !rec) ++n;
  }
  return n;
}

}  // namespace veq::batch::detail
