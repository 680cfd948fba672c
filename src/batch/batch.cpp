// SPDX-License-Identifier: MIT
// The batch runner: a pool of workers over a sorted listing, per-run manifests, summaries rebuilt from them.
#include "veq/batch/batch.hpp"

#include <fcntl.h>
#include <fmt/format.h>
#include <sys/file.h>
#include <sys/stat.h>
#include <unistd.h>

#include <algorithm>
#include <atomic>
#include <cerrno>
#include <charconv>
#include <chrono>
#include <cmath>
#include <condition_variable>
#include <cstring>
#include <ctime>
#include <mutex>
#include <new>
#include <nlohmann/json.hpp>
#include <thread>

#include "veq/core/atomic_file.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/report/summary.hpp"

namespace veq::batch {

namespace fs = std::filesystem;
using nlohmann::ordered_json;
using Clock = std::chrono::steady_clock;

namespace {

struct StatusName {
  RunStatus status;
  std::string_view name;
};
// The one table of status names (used by to_string, parsing and the summaries).
constexpr std::array<StatusName, kStatusCount> kStatusNames = {{{RunStatus::ok, "ok"},
                                                                {RunStatus::flagged, "flagged"},
                                                                {RunStatus::no_endpoint, "no_endpoint"},
                                                                {RunStatus::input_error, "input_error"},
                                                                {RunStatus::missing, "missing"},
                                                                {RunStatus::output_error, "output_error"},
                                                                {RunStatus::internal_error, "internal_error"},
                                                                {RunStatus::not_run, "not_run"}}};

}  // namespace

std::string_view to_string(RunStatus s) {
  for (const auto& e : kStatusNames) {
    if (e.status == s) return e.name;
  }
  return "internal_error";
}

std::optional<RunStatus> status_from_string(std::string_view name) {
  for (const auto& e : kStatusNames) {
    if (e.name == name) return e.status;
  }
  return std::nullopt;
}

bool is_failure(RunStatus s) {
  return s != RunStatus::ok && s != RunStatus::flagged;
}

std::size_t BatchSummary::failed() const {
  std::size_t n = 0;
  for (const auto& e : kStatusNames) {
    if (is_failure(e.status)) n += count(e.status);
  }
  return n;
}

std::vector<std::string> BatchOptions::validate() const {
  std::vector<std::string> p = list.validate();
  if (input_dir.empty()) p.emplace_back("input_dir: empty");
  if (output_dir.empty()) p.emplace_back("output_dir: empty");
  if (jobs > 1024) p.push_back(fmt::format("jobs = {}: at most 1024", jobs));
  for (auto& q : ingest.validate()) p.push_back(std::move(q));
  return p;
}

namespace {

// ---- small helpers -----------------------------------------------------------

ordered_json rounded(double x, int decimals) {
  if (!std::isfinite(x)) return nullptr;
  const double scale = std::pow(10.0, decimals);
  double r = std::round(x * scale) / scale;
  if (r == 0.0) r = 0.0;
  return r;
}

double seconds_since(Clock::time_point t) {
  return std::chrono::duration<double>(Clock::now() - t).count();
}

int decimals_for(double u) {
  if (!(u > 0) || !std::isfinite(u)) return 3;
  return std::clamp(1 - static_cast<int>(std::floor(std::log10(u))), 2, 6);
}

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

// The folder's lock and ownership mark, held for the whole batch; the kernel
// releases it when the process ends, however it ends.
class FolderLock {
 public:
  explicit FolderLock(const fs::path& dir) {
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
  FolderLock(const FolderLock&) = delete;
  FolderLock& operator=(const FolderLock&) = delete;
  ~FolderLock() { ::close(m_fd); }
  [[nodiscard]] int fd() const { return m_fd; }

 private:
  int m_fd = -1;
};

// batch.log: appended a whole line per write, so a killed batch leaves a log
// that ends at its last complete line. The only output with times in it.
class Log {
 public:
  explicit Log(const fs::path& path) { m_fd = ::open(path.c_str(), O_WRONLY | O_CREAT | O_APPEND | O_CLOEXEC, 0644); }
  Log(const Log&) = delete;
  Log& operator=(const Log&) = delete;
  ~Log() {
    if (m_fd >= 0) ::close(m_fd);
  }
  void line(const std::string& text) {
    if (m_fd < 0) return;
    std::string l = local_time_now() + "  " + text;
    std::replace(l.begin(), l.end(), '\n', ' ');
    l += '\n';
    const std::lock_guard<std::mutex> lock(m_mutex);
    const ssize_t n = ::write(m_fd, l.data(), l.size());
    (void)n;  // a log that cannot be written never stops the batch
  }

 private:
  int m_fd = -1;
  std::mutex m_mutex;
};

// A source file read whole, or why it could not be.
struct Source {
  enum class State { ok, missing, too_large, unreadable } state = State::ok;
  std::string bytes;
  std::uint64_t size = 0;
  std::string message;
};

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

std::optional<ordered_json> read_json(const fs::path& p) {
  Source s = read_source(p, std::uint64_t{16} << 20);
  if (s.state != Source::State::ok) return std::nullopt;
  ordered_json j = ordered_json::parse(s.bytes, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  return j;
}

// Everything except the per-run callback that changes a result, as text.
std::string ingest_fingerprint(const ingest::IngestOptions& o) {
  auto opt = [](const std::optional<std::size_t>& v) { return v ? std::to_string(*v) : std::string("-"); };
  return fmt::format(
      "max_file_bytes={};max_line_bytes={};columns={},{},{},{};volume_unit={};signal={};sort={};"
      "pH={:.17g}..{:.17g};mV={:.17g}",
      o.max_file_bytes,
      o.max_line_bytes,
      opt(o.columns.volume),
      opt(o.columns.signal),
      opt(o.columns.temperature),
      opt(o.columns.time),
      o.volume_unit.value_or("-"),
      o.signal ? std::string(to_string(*o.signal)) : std::string("-"),
      o.sort_by_volume,
      o.min_pH,
      o.max_pH,
      o.max_abs_mV);
}

// ---- one run -----------------------------------------------------------------

struct Task {
  std::string rel;
  std::string stem;
};

struct Outcome {
  RunStatus status = RunStatus::not_run;
  bool manifest = false;  // the summaries read this run from its manifest
  bool resumed = false;
  bool replaced = false;
  std::string error;  // for runs without a manifest
  double ms = 0.0;
};

struct Context {
  const BatchOptions& opt;
  const BatchHooks& hooks;
  fs::path runs_dir;
  std::string settings;  // settings identity plus the ingest options
  Log& log;
};

// A thumbnail in the manifest: "x,y x,y ..." in pixels to 0.1 px (one string
// parses far faster than an array of arrays when 10,000 manifests are read back).
ordered_json thumbnail_json(const report::Thumbnail& t) {
  std::string pts, eps;
  for (const auto& [x, y] : t.points_px) pts += fmt::format("{}{:.1f},{:.1f}", pts.empty() ? "" : " ", x, y);
  for (const double x : t.endpoints_px) eps += fmt::format("{}{:.1f}", eps.empty() ? "" : " ", x);
  return {{"points", pts}, {"endpoints", eps}};
}

// Numbers separated by spaces (and commas within a point); nullopt on anything else.
std::optional<std::vector<double>> numbers(const std::string& text) {
  std::vector<double> v;
  const char* p = text.data();
  const char* end = p + text.size();
  while (p < end) {
    double x = 0;
    const auto [q, ec] = std::from_chars(p, end, x);
    if (ec != std::errc() || !std::isfinite(x)) return std::nullopt;
    v.push_back(x);
    p = q;
    if (p < end && (*p == ' ' || *p == ',')) ++p;
  }
  return v;
}

// Read back from a manifest; the numbers are checked, and the SVG is drawn from them anew.
std::optional<report::Thumbnail> thumbnail_from(const ordered_json& j) {
  if (!j.is_object() || !j.contains("points") || !j["points"].is_string()) return std::nullopt;
  const auto pts = numbers(j["points"].get<std::string>());
  if (!pts || pts->size() % 2 != 0) return std::nullopt;
  report::Thumbnail t;
  for (std::size_t i = 0; i + 1 < pts->size(); i += 2) t.points_px.emplace_back((*pts)[i], (*pts)[i + 1]);
  if (j.contains("endpoints") && j["endpoints"].is_string()) {
    if (const auto eps = numbers(j["endpoints"].get<std::string>())) t.endpoints_px = *eps;
  }
  return t;
}

// What the summaries need of an analysed run.
ordered_json analysed_row(const Analysis& a, RunStatus& status) {
  const auto& eps = a.endpoints.endpoints;
  std::string result, flags, error;
  ordered_json list = ordered_json::array();
  const bool ph = a.curve.signal == SignalKind::ph;
  for (const auto& e : eps) {
    const int d = decimals_for(e.uncertainty_mL);
    result += fmt::format("{}{:.{}f} +/- {:.{}f} mL", result.empty() ? "" : "; ", e.volume_mL, d, e.uncertainty_mL, d);
    if (!e.flags.empty()) {
      flags += fmt::format("{}EP{}", flags.empty() ? "" : "; ", e.index);
      for (const auto& f : e.flags) flags += " " + f;
    }
    ordered_json ej;
    ej["index"] = e.index;
    ej["volume_mL"] = rounded(e.volume_mL, 6);
    ej["uncertainty_mL"] = rounded(e.uncertainty_mL, 6);
    ej[ph ? "pH" : "mV"] = rounded(e.value, ph ? 4 : 3);
    ej["flags"] = e.flags;
    list.push_back(ej);
  }
  if (eps.empty()) {
    status = RunStatus::no_endpoint;
    error = "no endpoint found";
    for (const auto& w : a.endpoints.warnings) {
      if (w.code == "no_endpoint" || w.code == "too_few_readings") error = w.message;
    }
  } else {
    status = flags.empty() ? RunStatus::ok : RunStatus::flagged;
  }
  ordered_json row;
  row["id"] = a.run.facts.sample_id;
  row["status"] = std::string(to_string(status));
  row["endpoints"] = list;
  row["result"] = result;
  row["flags"] = flags;
  row["error"] = error;
  return row;
}

ordered_json failed_row(RunStatus status, const std::string& error) {
  ordered_json row;
  row["id"] = "";
  row["status"] = std::string(to_string(status));
  row["endpoints"] = ordered_json::array();
  row["result"] = "";
  row["flags"] = "";
  row["error"] = error;
  return row;
}

std::string error_text(const InputError& e) {
  std::string s = e.what();
  if (!e.hint().empty()) s += " (hint: " + e.hint() + ")";
  return s;
}

// Whether an earlier manifest still stands for this run: same file, same
// source bytes, method, settings, veq version and report choice, and every
// output it lists present with the bytes it recorded.
bool still_valid(
    const ordered_json& m, const Context& cx, const Task& t, const std::string& source_hash, std::uint64_t size) {
  auto str = [&](const char* k) { return m.contains(k) && m[k].is_string() ? m[k].get<std::string>() : std::string(); };
  if (str("schema") != kManifestSchema || str("veq_version") != version() || str("file") != t.rel) return false;
  if (str("method") != cx.opt.method_identity || str("settings") != cx.settings) return false;
  if (!m.contains("html") || !m["html"].is_boolean() || m["html"].get<bool>() != cx.opt.html_reports) return false;
  if (!m.contains("source") || !m["source"].is_object()) return false;
  const auto& src = m["source"];
  if (!src.contains("bytes") || !src["bytes"].is_number_unsigned() || src["bytes"].get<std::uint64_t>() != size)
    return false;
  if (!src.contains("xxh3") || !src["xxh3"].is_string() || src["xxh3"].get<std::string>() != source_hash) return false;
  if (!m.contains("row") || !m["row"].is_object() || !m["row"].contains("status") ||
      !status_from_string(m["row"]["status"].is_string() ? m["row"]["status"].get<std::string>() : "")) {
    return false;
  }
  if (!m.contains("outputs") || !m["outputs"].is_object()) return false;
  for (const auto& [kind, o] : m["outputs"].items()) {
    (void)kind;
    if (!o.is_object() || !o.contains("name") || !o["name"].is_string() || !o.contains("xxh3")) return false;
    const std::string name = o["name"].get<std::string>();
    if (name != kResultJson && name != kReportHtml) return false;
    if (hash_of_file(cx.runs_dir / t.stem / name) != o["xxh3"].get<std::string>()) return false;
  }
  return true;
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

void remove_stale_outputs(const Context& cx, const Task& t) {
  std::error_code ec;
  fs::remove(cx.runs_dir / t.stem / kResultJson, ec);
  fs::remove(cx.runs_dir / t.stem / kReportHtml, ec);
}

Outcome process(const Context& cx, const Task& t) {
  Outcome out;
  const auto t0 = Clock::now();
  if (cx.hooks.before_run) cx.hooks.before_run(t.rel);
  const fs::path source_path = cx.opt.input_dir / fs::path(t.rel);
  const fs::path run_dir = cx.runs_dir / t.stem;
  const fs::path manifest_path = run_dir / kManifestJson;
  // One folder per run: its files are created and renamed without contending
  // with the other workers for one big folder. Leftovers of a killed batch in it go first.
  if (const std::size_t swept = sweep_temporaries(run_dir); swept > 0) {
    cx.log.line(fmt::format("removed {} temporary file(s) left by an interrupted batch for {}", swept, t.rel));
  }
  Source src = read_source(source_path, cx.opt.ingest.max_file_bytes);
  if (src.state == Source::State::missing) {
    out.status = RunStatus::missing;
    out.error = t.rel + ": " + src.message;
    return out;
  }
  const std::string source_hash = src.state == Source::State::ok ? hash_hex(hash64(src.bytes)) : std::string();

  const std::optional<ordered_json> earlier = read_json(manifest_path);
  if (earlier && !cx.opt.force && still_valid(*earlier, cx, t, source_hash, src.size)) {
    out.status = *status_from_string((*earlier)["row"]["status"].get<std::string>());
    out.manifest = true;
    out.resumed = true;
    return out;
  }
  out.replaced = earlier.has_value();

  ordered_json m;
  m["schema"] = kManifestSchema;
  m["veq_version"] = version();
  m["file"] = t.rel;
  m["source"] = {{"bytes", src.size}, {"xxh3", source_hash}};
  m["method"] = cx.opt.method_identity;
  m["settings"] = cx.settings;
  m["html"] = cx.opt.html_reports;
  ordered_json outputs = ordered_json::object();
  std::string json_text, html_text;
  RunStatus status = RunStatus::ok;
  try {
    if (src.state != Source::State::ok) throw InputError({t.rel, 0, 0}, src.message);
    src.bytes.shrink_to_fit();
    Run run = ingest::parse_run(src.bytes, t.rel, cx.opt.ingest);
    std::string().swap(src.bytes);
    const AnalyzeOptions ao = cx.opt.configure ? cx.opt.configure(run) : AnalyzeOptions{};
    const Analysis a = analyze(std::move(run), ao);
    json_text = report::to_json(a);
    if (cx.opt.html_reports) {
      report::HtmlOptions ho;
      ho.index_href = "../../" + std::string(kIndexHtml);
      html_text = report::to_html(a, ho);
    }
    m["row"] = analysed_row(a, status);
    m["thumbnail"] = thumbnail_json(report::thumbnail(a));
  } catch (const InputError& e) {
    status = RunStatus::input_error;
    m["row"] = failed_row(status, error_text(e));
  } catch (const std::bad_alloc&) {
    out.status = RunStatus::internal_error;
    out.error = t.rel + ": internal error: out of memory while processing this file (a bug in veq, please report it)";
    return out;
  }
  // Other exceptions are bugs; the caller turns them into internal_error.

  try {
    std::error_code ec;
    fs::create_directory(run_dir, ec);
    if (ec) throw InputError({run_dir.string(), 0, 0}, "cannot create the run's output folder: " + ec.message());
    if (!json_text.empty()) {
      io::write_file_atomically(run_dir / kResultJson, json_text, true, io::Sync::deferred);
      outputs["json"] = {{"name", kResultJson}, {"xxh3", hash_hex(hash64(json_text))}};
    }
    if (!html_text.empty()) {
      io::write_file_atomically(run_dir / kReportHtml, html_text, true, io::Sync::deferred);
      outputs["html"] = {{"name", kReportHtml}, {"xxh3", hash_hex(hash64(html_text))}};
    }
    if (json_text.empty()) remove_stale_outputs(cx, t);
    m["outputs"] = outputs;
    io::write_file_atomically(manifest_path, m.dump(1) + "\n", true, io::Sync::deferred);
  } catch (const InputError& e) {
    out.status = RunStatus::output_error;
    out.error = t.rel + ": " + error_text(e);
    return out;
  }
  out.status = status;
  out.manifest = true;
  out.ms = std::chrono::duration<double, std::milli>(Clock::now() - t0).count();
  return out;
}

// ---- the folder ----------------------------------------------------------------

void check_output_folder(const BatchOptions& o) {
  std::error_code ec;
  if (fs::exists(o.output_dir, ec) && !fs::is_directory(o.output_dir, ec)) {
    throw InputError(
        {o.output_dir.string(), 0, 0}, "the output path exists and is not a folder", "choose a folder for --out");
  }
  if (fs::exists(o.output_dir, ec) && fs::equivalent(o.output_dir, o.input_dir, ec)) {
    throw InputError({o.output_dir.string(), 0, 0},
                     "the output folder is the input folder",
                     "write the results to a folder of their own, e.g. --out results");
  }
  if (fs::is_directory(o.output_dir, ec) && !fs::exists(o.output_dir / kLockFile, ec) && !o.force) {
    if (!fs::is_empty(o.output_dir, ec)) {
      throw InputError({o.output_dir.string(), 0, 0},
                       "the output folder holds files that veq batch did not write",
                       "choose an empty or new folder for --out (or pass --force to write into it anyway)");
    }
  }
  fs::create_directories(o.output_dir / kRunsFolder, ec);
  if (ec) {
    throw InputError({o.output_dir.string(), 0, 0},
                     "cannot create the output folder: " + ec.message(),
                     "check the path and its permissions");
  }
}

// summary.json is written a run at a time; each entry is indented to sit in the "runs" array.
std::string indent(const std::string& text, std::string_view by) {
  std::string out(by);
  for (const char c : text) {
    out += c;
    if (c == '\n') out += by;
  }
  return out;
}

report::SummaryRow row_from(const ordered_json& row, const Task& t, const ordered_json* manifest) {
  auto s = [&](const char* k) {
    return row.contains(k) && row[k].is_string() ? row[k].get<std::string>() : std::string();
  };
  report::SummaryRow r;
  r.id = s("id");
  r.file = t.rel;
  r.status = s("status");
  r.endpoints =
      row.contains("endpoints") && row["endpoints"].is_array() ? static_cast<int>(row["endpoints"].size()) : 0;
  r.result = s("result");
  r.flags = s("flags");
  r.error = s("error");
  if (manifest != nullptr && manifest->contains("outputs") && (*manifest)["outputs"].contains("html")) {
    r.report_href = fmt::format("{}/{}/{}", kRunsFolder, t.stem, kReportHtml);
  }
  if (manifest != nullptr && manifest->contains("thumbnail")) r.thumbnail = thumbnail_from((*manifest)["thumbnail"]);
  return r;
}

ordered_json json_entry(const ordered_json& row, const Task& t, const ordered_json* manifest) {
  ordered_json e;
  e["file"] = t.rel;
  for (const char* k : {"id", "status", "endpoints", "result", "flags", "error"})
    e[k] = row.contains(k) ? row[k] : nullptr;
  e["report"] = nullptr;
  e["json"] = nullptr;
  if (manifest != nullptr && manifest->contains("outputs")) {
    const auto& o = (*manifest)["outputs"];
    if (o.contains("html")) e["report"] = fmt::format("{}/{}/{}", kRunsFolder, t.stem, kReportHtml);
    if (o.contains("json")) e["json"] = fmt::format("{}/{}/{}", kRunsFolder, t.stem, kResultJson);
  }
  return e;
}

}  // namespace

BatchSummary run_batch(const BatchOptions& options, const BatchHooks& hooks) {
  const auto start = Clock::now();
  if (const auto p = options.validate(); !p.empty()) throw InputError({"options", 0, 0}, p.front());
  // The listing first: a missing input folder is reported before anything is created.
  ListOptions lo = options.list;
  lo.exclude = options.output_dir;
  Listing listing = list_runs(options.input_dir, lo);

  check_output_folder(options);
  const FolderLock lock(options.output_dir);
  Log log(options.output_dir / kLogFile);
  const fs::path runs_dir = options.output_dir / kRunsFolder;
  for (const fs::path& d : {options.output_dir, runs_dir}) {
    if (const std::size_t n = sweep_temporaries(d); n > 0) {
      log.line(fmt::format("removed {} temporary file(s) left by an interrupted batch in {}", n, d.string()));
    }
  }

  std::vector<Task> tasks;
  tasks.reserve(listing.files.size());
  for (auto& rel : listing.files) tasks.push_back({rel, output_stem(rel)});
  {
    std::vector<std::string> stems;
    stems.reserve(tasks.size());
    for (const auto& t : tasks) stems.push_back(t.stem);
    std::sort(stems.begin(), stems.end());
    if (std::adjacent_find(stems.begin(), stems.end()) != stems.end()) {
      throw std::logic_error("two runs map to the same output name (a 64-bit hash collision)");
    }
  }
  unsigned jobs = options.jobs != 0 ? options.jobs : std::max(1u, std::thread::hardware_concurrency());
  jobs = static_cast<unsigned>(std::clamp<std::size_t>(tasks.size(), 1, jobs));

  Context cx{options, hooks, runs_dir, options.settings_identity + "|" + ingest_fingerprint(options.ingest), log};
  log.line(fmt::format("start: veq {}, {} runs in '{}' (shard {}/{}, {} matched in all), {} worker(s){}{}",
                       version(),
                       tasks.size(),
                       options.input_dir.string(),
                       options.list.shard.index,
                       options.list.shard.count,
                       listing.matched_all_shards,
                       jobs,
                       options.force ? ", --force" : "",
                       options.method_identity.empty() ? "" : ", method " + options.method_identity));
  for (const auto& p : listing.problems) log.line("listing problem: " + to_string(p));

  std::vector<Outcome> outcomes(tasks.size());
  std::atomic<std::size_t> next{0}, done{0};
  std::atomic<bool> stopped{false};
  std::mutex mu;
  std::condition_variable cv;
  std::size_t workers_left = jobs;
  auto worker = [&] {
    for (;;) {
      if (hooks.stop_requested && hooks.stop_requested()) {
        stopped = true;
        break;
      }
      const std::size_t i = next.fetch_add(1);
      if (i >= tasks.size()) break;
      Outcome o;
      try {
        o = process(cx, tasks[i]);
      } catch (const std::exception& e) {
        o = Outcome{};
        o.status = RunStatus::internal_error;
        o.error = tasks[i].rel + ": internal error (a bug in veq, please report it with the file): " + e.what();
      } catch (...) {
        o = Outcome{};
        o.status = RunStatus::internal_error;
        o.error = tasks[i].rel + ": internal error (a bug in veq, please report it with the file)";
      }
      std::string line = fmt::format("{:<14} {}", to_string(o.status), tasks[i].rel);
      if (o.resumed)
        line += "  (unchanged, kept)";
      else
        line += fmt::format("  ({}{:.1f} ms)", o.replaced ? "redone, earlier result replaced; " : "", o.ms);
      if (!o.error.empty()) line += "  " + o.error;
      log.line(line);
      outcomes[i] = std::move(o);
      done.fetch_add(1);
    }
    const std::lock_guard<std::mutex> g(mu);
    --workers_left;
    cv.notify_all();
  };
  const auto runs_start = Clock::now();
  std::vector<std::thread> pool;
  pool.reserve(jobs);
  for (unsigned k = 0; k < jobs; ++k) pool.emplace_back(worker);
  {
    std::unique_lock<std::mutex> g(mu);
    while (workers_left > 0) {
      cv.wait_for(g, std::chrono::milliseconds(200));
      if (hooks.progress && workers_left > 0) {
        g.unlock();
        hooks.progress({done.load(), tasks.size(), std::chrono::duration<double>(Clock::now() - runs_start).count()});
        g.lock();
      }
    }
  }
  for (auto& th : pool) th.join();
  if (hooks.progress) {
    hooks.progress({done.load(), tasks.size(), std::chrono::duration<double>(Clock::now() - runs_start).count()});
  }
  const double runs_s = std::chrono::duration<double>(Clock::now() - runs_start).count();

  // Per-run files were written without a sync each; one sync of the file
  // system makes them durable before the summaries that point at them.
  const auto sync_start = Clock::now();
  ::syncfs(lock.fd());
  const double sync_s = seconds_since(sync_start);
  const auto summaries_start = Clock::now();

  BatchSummary summary;
  summary.listed = tasks.size();
  summary.stopped = stopped.load();
  summary.problems = listing.problems;
  for (const auto& o : outcomes) {
    ++summary.counts[static_cast<std::size_t>(o.status)];
    if (o.status == RunStatus::not_run) continue;
    if (o.resumed)
      ++summary.resumed;
    else
      ++summary.processed;
    if (o.replaced) ++summary.replaced;
  }

  // Summaries, rebuilt from the manifests in listing order.
  const fs::path& out = options.output_dir;
  io::AtomicFile csv(out / kSummaryCsv, true), json(out / kSummaryJson, true), index(out / kIndexHtml, true),
      errors(out / kErrorsTxt, true);
  csv.write(report::summary_csv_header());
  const std::size_t failed = summary.failed();
  if (failed == 0 && listing.problems.empty()) {
    errors.write(fmt::format("veq batch: no run failed ({} runs).\n", tasks.size()));
  } else {
    errors.write(fmt::format(
        "veq batch: {} of {} runs failed; {} listing problem(s).\n", failed, tasks.size(), listing.problems.size()));
  }
  for (const auto& p : listing.problems) errors.write(to_string(p) + "  [listing]\n");
  const std::string shard_text = options.list.shard.count > 1
                                     ? fmt::format("{}/{}", options.list.shard.index, options.list.shard.count)
                                     : std::string();
  ordered_json head;
  head["schema"] = kBatchSchema;
  head["veq_version"] = version();
  head["input"] = options.input_dir.string();
  head["shard"] = shard_text.empty() ? ordered_json(nullptr) : ordered_json(shard_text);
  head["method"] = options.method_identity.empty() ? ordered_json(nullptr) : ordered_json(options.method_identity);
  head["method_applied"] = false;
  head["total"] = tasks.size();
  ordered_json counts = ordered_json::object();
  report::IndexInfo info;
  info.input = options.input_dir.string();
  info.method = options.method_identity;
  info.shard = shard_text;
  info.total = tasks.size();
  for (const auto& e : kStatusNames) {
    counts[std::string(e.name)] = summary.count(e.status);
    info.counts.emplace_back(std::string(e.name), summary.count(e.status));
  }
  head["counts"] = counts;
  ordered_json problems = ordered_json::array();
  for (const auto& p : listing.problems) problems.push_back({{"where", p.where.file}, {"message", p.message}});
  head["problems"] = problems;
  std::string head_text = head.dump(2, ' ', false, nlohmann::json::error_handler_t::replace);
  head_text.erase(head_text.size() - 2);  // drop "\n}"
  json.write(head_text + ",\n  \"runs\": [");
  index.write(report::index_html_begin(info));

  // Each run's pieces of the four files are made on the worker threads, a
  // chunk at a time (memory stays bounded), and written in listing order.
  struct Pieces {
    std::string csv, json, index, errors;
  };
  auto pieces_of = [&](std::size_t i) -> Pieces {
    const Task& t = tasks[i];
    const Outcome& o = outcomes[i];
    Pieces p;
    try {
      std::optional<ordered_json> manifest;
      if (o.manifest) manifest = read_json(runs_dir / t.stem / kManifestJson);
      ordered_json row;
      if (manifest && manifest->contains("row") && (*manifest)["row"].is_object()) {
        row = (*manifest)["row"];
      } else if (o.manifest) {
        row = failed_row(RunStatus::internal_error, t.rel + ": internal error: its manifest could not be read back");
      } else {
        row = failed_row(o.status,
                         o.status == RunStatus::not_run ? "not processed: the batch was stopped first" : o.error);
      }
      const ordered_json* mp = manifest ? &*manifest : nullptr;
      const report::SummaryRow r = row_from(row, t, mp);
      p.csv = report::summary_csv_row(r);
      p.json = std::string(i == 0 ? "\n" : ",\n") +
               indent(json_entry(row, t, mp).dump(2, ' ', false, nlohmann::json::error_handler_t::replace), "    ");
      p.index = report::index_html_row(r, i + 1);
      if (const auto st = status_from_string(r.status); st && is_failure(*st)) {
        std::string e = r.error;
        if (e.rfind(t.rel, 0) != 0) e = t.rel + ": " + e;
        p.errors = fmt::format("{}  [{}]\n", e, r.status);
      }
    } catch (const std::exception& e) {
      // A manifest that parses but does not have the expected shape (edited by hand?).
      report::SummaryRow r;
      r.file = t.rel;
      r.status = std::string(to_string(RunStatus::internal_error));
      r.error = t.rel + ": internal error: its manifest could not be read back (" + e.what() + ")";
      ordered_json row = failed_row(RunStatus::internal_error, r.error);
      p.csv = report::summary_csv_row(r);
      p.json =
          std::string(i == 0 ? "\n" : ",\n") +
          indent(json_entry(row, t, nullptr).dump(2, ' ', false, nlohmann::json::error_handler_t::replace), "    ");
      p.index = report::index_html_row(r, i + 1);
      p.errors = r.error + "  [internal_error]\n";
    }
    return p;
  };
  constexpr std::size_t kChunk = 512;
  std::vector<Pieces> chunk;
  for (std::size_t begin = 0; begin < tasks.size(); begin += kChunk) {
    const std::size_t end = std::min(tasks.size(), begin + kChunk);
    chunk.assign(end - begin, Pieces{});
    std::vector<std::thread> helpers;
    for (unsigned k = 0; k < jobs; ++k) {
      helpers.emplace_back([&, k] {
        for (std::size_t i = begin + k; i < end; i += jobs) chunk[i - begin] = pieces_of(i);
      });
    }
    for (auto& h : helpers) h.join();
    Pieces joined;  // one write per file and chunk
    for (const Pieces& p : chunk) {
      joined.csv += p.csv;
      joined.json += p.json;
      joined.index += p.index;
      joined.errors += p.errors;
    }
    csv.write(joined.csv);
    json.write(joined.json);
    index.write(joined.index);
    errors.write(joined.errors);
  }
  json.write(tasks.empty() ? "]\n}\n" : "\n  ]\n}\n");
  index.write(report::index_html_end());
  // index.html last: a reader who sees it finds the files it links to.
  csv.commit();
  json.commit();
  errors.commit();
  index.commit();
  summary.index_html = out / kIndexHtml;
  summary.elapsed_s = std::chrono::duration<double>(Clock::now() - start).count();
  std::string counts_text;
  for (const auto& e : kStatusNames) {
    if (summary.count(e.status) > 0) counts_text += fmt::format(" {} {},", e.name, summary.count(e.status));
  }
  if (!counts_text.empty()) counts_text.pop_back();
  log.line(fmt::format(
      "{}: {} processed, {} kept unchanged, {} replaced; {:.2f} s in all (runs {:.2f} s, {:.0f} runs/s; sync "
      "{:.2f} s; summaries {:.2f} s);{}",
      summary.stopped ? "stopped early" : "done",
      summary.processed,
      summary.resumed,
      summary.replaced,
      summary.elapsed_s,
      runs_s,
      runs_s > 0 ? static_cast<double>(summary.processed + summary.resumed) / runs_s : 0.0,
      sync_s,
      seconds_since(summaries_start),
      counts_text));
  return summary;
}

}  // namespace veq::batch
