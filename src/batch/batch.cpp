// SPDX-License-Identifier: MIT
// The batch runner: a pool of workers over a sorted listing, per-run manifests, summaries rebuilt from them.
#include "veq/batch/batch.hpp"

#include <fmt/format.h>
#include <unistd.h>  // syncfs

#include <algorithm>
#include <atomic>
#include <chrono>
#include <condition_variable>
#include <map>
#include <mutex>
#include <new>
#include <thread>

#include "batch/files.hpp"
#include "batch/manifest.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/method/replicates.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/report/summary.hpp"

namespace veq::batch {

namespace fs = std::filesystem;
using namespace detail;  // NOLINT(google-build-using-namespace): the runner's own helpers
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
                                                                {RunStatus::not_run, "not_run"},
                                                                {RunStatus::no_result, "no_result"},
                                                                {RunStatus::out_of_spec, "out_of_spec"}}};

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

double seconds_since(Clock::time_point t) {
  return std::chrono::duration<double>(Clock::now() - t).count();
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
  Journal& journal;
};

// A record of the journal as a JSON object; nullopt when it is empty or does not parse as one.
std::optional<ordered_json> parsed(std::string_view record) {
  if (record.empty()) return std::nullopt;
  ordered_json j = ordered_json::parse(record, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  return j;
}

Outcome process(const Context& cx, const Task& t) {
  Outcome out;
  const auto t0 = Clock::now();
  if (cx.hooks.before_run) cx.hooks.before_run(t.rel);
  const fs::path source_path = cx.opt.input_dir / fs::path(t.rel);
  Source src = read_source(source_path, cx.opt.ingest.max_file_bytes);
  if (src.state == Source::State::missing) {
    out.status = RunStatus::missing;
    out.error = t.rel + ": " + src.message;
    return out;
  }
  const std::string source_hash = src.state == Source::State::ok ? hash_hex(hash64(src.bytes)) : std::string();

  const std::optional<ordered_json> earlier = parsed(cx.journal.find(t.stem).value_or(std::string()));
  const ManifestKey key{t.rel, source_hash, src.size, cx.opt.method_identity, cx.settings, cx.opt.html_reports};
  if (earlier && !cx.opt.force && still_valid(*earlier, key, cx.runs_dir, t.stem)) {
    out.status = *status_from_string((*earlier)["row"]["status"].get<std::string>());
    out.manifest = true;
    out.resumed = true;
    return out;
  }
  out.replaced = earlier.has_value();

  ordered_json m;
  m["stem"] = t.stem;  // first: the journal finds a record by it
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
    Run run = ingest::parse_run(src.bytes, t.rel, cx.opt.ingest);
    std::string().swap(src.bytes);  // the bytes are not needed during the analysis
    const AnalyzeOptions ao = cx.opt.configure ? cx.opt.configure(run) : AnalyzeOptions{};
    const Analysis a = analyze(std::move(run), ao);
    json_text = report::to_json(a);
    if (cx.opt.html_reports) {
      report::HtmlOptions ho;
      ho.index_href = "../" + std::string(kIndexHtml);
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
    if (!json_text.empty()) {
      const std::string name = result_name(t.stem);
      io::write_file_atomically(cx.runs_dir / name, json_text, true, io::Sync::deferred);
      outputs["json"] = {{"name", name}, {"xxh3", hash_hex(hash64(json_text))}};
    }
    if (!html_text.empty()) {
      const std::string name = report_name(t.stem);
      io::write_file_atomically(cx.runs_dir / name, html_text, true, io::Sync::deferred);
      outputs["html"] = {{"name", name}, {"xxh3", hash_hex(hash64(html_text))}};
    }
    // An earlier result or report of a run redone without one (it failed now, or --no-html) would
    // contradict the new manifest.
    std::error_code ec;
    if (json_text.empty()) fs::remove(cx.runs_dir / result_name(t.stem), ec);
    if (html_text.empty()) fs::remove(cx.runs_dir / report_name(t.stem), ec);
    m["outputs"] = outputs;
    // Names and metadata may hold bytes that are not UTF-8: replaced (U+FFFD) in JSON, never a failure.
    // One line (the dump escapes newlines in strings), after the files it lists.
    cx.journal.append(t.stem, m.dump(-1, ' ', false, nlohmann::json::error_handler_t::replace));
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
  if (const std::size_t n = remove_folder_layout(runs_dir); n > 0) {
    log.line(
        fmt::format("removed {} run folder(s) of an earlier veq's layout (runs/<name>/manifest.json); their "
                    "runs are done again into runs/<name>.json",
                    n));
  }
  Journal journal(runs_dir / std::string(kManifestJournal));
  if (journal.cut_short()) log.line("the manifest journal ended in a line cut short (a killed batch): removed");
  if (journal.dropped() > 0) {
    log.line(
        fmt::format("{} unusable line(s) in the manifest journal ignored (a run with no usable line is "
                    "done again)",
                    journal.dropped()));
  }

  std::vector<Task> tasks;
  tasks.reserve(listing.files.size());
  for (auto& rel : listing.files) tasks.push_back({rel, output_stem(rel)});
  std::vector<std::string_view> listed_stems;  // into tasks, sorted: the journal keeps other runs after these
  listed_stems.reserve(tasks.size());
  for (const auto& t : tasks) listed_stems.push_back(t.stem);
  std::sort(listed_stems.begin(), listed_stems.end());
  if (std::adjacent_find(listed_stems.begin(), listed_stems.end()) != listed_stems.end()) {
    throw std::logic_error("two runs map to the same output name (a 64-bit hash collision)");
  }
  unsigned jobs = options.jobs != 0 ? options.jobs : std::max(1u, std::thread::hardware_concurrency());
  jobs = static_cast<unsigned>(std::clamp<std::size_t>(tasks.size(), 1, jobs));

  Context cx{
      options, hooks, runs_dir, options.settings_identity + "|" + ingest_fingerprint(options.ingest), log, journal};
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
    errors.write(fmt::format("veq batch: no run failed ({} run{}).\n", tasks.size(), tasks.size() == 1 ? "" : "s"));
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
  struct Value {
    std::string group, result, unit, file;
    double value;
    std::string source_xxh3;  // the file's content hash: the same file twice is one replicate
  };
  struct Pieces {
    std::string csv, json, index, errors;
    std::string record;         // the run's journal line, for the journal rewritten in listing order
    std::vector<Value> values;  // results, for replicate statistics
  };
  auto pieces_of = [&](std::size_t i) -> Pieces {
    const Task& t = tasks[i];
    const Outcome& o = outcomes[i];
    Pieces p;
    // An earlier batch's record of a run not redone this time (missing, stopped, failed inside) stays.
    if (auto record = journal.find(t.stem)) p.record = std::move(*record);
    try {
      const std::optional<ordered_json> manifest = o.manifest ? parsed(p.record) : std::nullopt;
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
      const report::SummaryRow r = row_from(row, t.rel, t.stem, mp);
      if (row.contains("results") && row["results"].is_array()) {
        const std::string stem = fs::path(t.rel).stem().string();
        const std::string group = method::replicate_group(r.id, stem, options.replicate_pattern);
        std::string xxh3;
        if (mp != nullptr && mp->contains("source") && (*mp)["source"].is_object())
          xxh3 = (*mp)["source"].value("xxh3", "");
        for (const auto& v : row["results"]) {
          if (v.contains("value") && v["value"].is_number()) {
            p.values.push_back(
                {group, v.value("name", ""), v.value("unit", ""), t.rel, v["value"].get<double>(), xxh3});
          }
        }
      }
      p.csv = report::summary_csv_row(r);
      p.json = std::string(i == 0 ? "\n" : ",\n") +
               indent(json_entry(row, t.rel, t.stem, mp).dump(2, ' ', false, nlohmann::json::error_handler_t::replace),
                      "    ");
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
          indent(json_entry(row, t.rel, t.stem, nullptr).dump(2, ' ', false, nlohmann::json::error_handler_t::replace),
                 "    ");
      p.index = report::index_html_row(r, i + 1);
      p.errors = r.error + "  [internal_error]\n";
    }
    return p;
  };
  // The journal rewritten: the listed runs' records in listing order, then those of other runs (files gone
  // from the folder, other shards) by name; the same bytes whatever the order the workers appended in.
  io::AtomicFile compacted(runs_dir / std::string(kManifestJournal), true);
  constexpr std::size_t kChunk = 512;
  std::vector<Pieces> chunk;
  std::map<std::pair<std::string, std::string>, std::vector<Value>> replicate_groups;
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
    std::string records;
    std::size_t record_bytes = 0;
    for (const Pieces& p : chunk) record_bytes += p.record.size() + 1;
    records.reserve(record_bytes);
    for (const Pieces& p : chunk) {
      if (!p.record.empty()) records.append(p.record).push_back('\n');
      joined.csv += p.csv;
      joined.json += p.json;
      joined.index += p.index;
      joined.errors += p.errors;
      for (const auto& v : p.values) replicate_groups[{v.group, v.result}].push_back(v);
    }
    compacted.write(records);
    csv.write(joined.csv);
    json.write(joined.json);
    index.write(joined.index);
    errors.write(joined.errors);
  }
  // Replicate statistics: groups of two or more runs with the same result.
  io::AtomicFile reps_csv(out / kReplicatesCsv, true);
  reps_csv.write(
      "group,result,unit,n,mean,sd,rsd_percent,ci95_low,ci95_high,grubbs_G,grubbs_critical,outlier,rsd_acceptance\r\n");
  ordered_json reps = ordered_json::array();
  std::vector<report::ReplicateRow> rep_rows;
  for (const auto& [key, all_vals] : replicate_groups) {
    // A file whose content equals an earlier member's (a copy under another name) is not a second
    // measurement: it is listed as a duplicate and left out of the statistics.
    std::vector<Value> vals;
    std::vector<std::pair<std::string, std::string>> duplicates;  // (file, the member it repeats)
    for (const auto& v : all_vals) {
      const auto same = std::find_if(vals.begin(), vals.end(), [&](const Value& w) {
        return !v.source_xxh3.empty() && w.source_xxh3 == v.source_xxh3;
      });
      if (same != vals.end())
        duplicates.emplace_back(v.file, same->file);
      else
        vals.push_back(v);
    }
    for (const auto& [file, of] : duplicates) {
      errors.write(
          fmt::format("{}: the same content as {} (the first in path order); counted once in the replicates of {} ({}) "
                      " [replicates]\n",
                      file,
                      of,
                      key.first,
                      key.second));
    }
    if (vals.size() < 2) continue;
    std::vector<double> x;
    for (const auto& v : vals) x.push_back(v.value);
    const method::ReplicateStats st = method::replicate_stats(x);
    const std::string acceptance = !options.max_rsd_percent                     ? std::string()
                                   : st.rsd_percent <= *options.max_rsd_percent ? "passed"
                                                                                : "failed";
    const std::string outlier = st.outlier ? vals[*st.outlier].file : std::string();
    ordered_json j;
    j["group"] = key.first;
    j["result"] = key.second;
    j["unit"] = vals.front().unit;
    j["n"] = st.n;
    j["mean"] = st.mean;
    j["sd"] = st.sd;
    j["rsd_percent"] = st.rsd_percent;
    j["ci95"] = {st.ci95_low, st.ci95_high};
    j["grubbs_G"] = st.grubbs_G;
    j["grubbs_critical"] = st.grubbs_critical;
    j["outlier"] = outlier.empty() ? ordered_json(nullptr) : ordered_json(outlier);
    j["rsd_acceptance"] = acceptance.empty() ? ordered_json(nullptr) : ordered_json(acceptance);
    ordered_json members = ordered_json::array();
    for (const auto& v : vals) members.push_back({{"file", v.file}, {"value", v.value}});
    j["members"] = members;
    ordered_json dups = ordered_json::array();
    for (const auto& d : duplicates) dups.push_back({{"file", d.first}, {"duplicate_of", d.second}});
    j["duplicates"] = dups;
    reps.push_back(j);
    reps_csv.write(report::csv_field(key.first) + "," + report::csv_field(key.second) + "," +
                   report::csv_field(vals.front().unit) + "," +
                   fmt::format("{},{:.8g},{:.4g},{:.4g},{:.8g},{:.8g},{:.4g},{:.4g},",
                               st.n,
                               st.mean,
                               st.sd,
                               st.rsd_percent,
                               st.ci95_low,
                               st.ci95_high,
                               st.grubbs_G,
                               st.grubbs_critical) +
                   report::csv_field(outlier) + "," + report::csv_field(acceptance) + "\r\n");
    rep_rows.push_back({key.first,
                        key.second,
                        vals.front().unit,
                        st.n,
                        st.mean,
                        st.sd,
                        st.rsd_percent,
                        st.ci95_low,
                        st.ci95_high,
                        outlier,
                        acceptance});
    if (acceptance == "failed") {
      ++summary.replicate_failures;
      errors.write(fmt::format("replicates of {} ({}): RSD {:.2f} % above the method's limit {:g} %  [replicates]\n",
                               key.first,
                               key.second,
                               st.rsd_percent,
                               *options.max_rsd_percent));
    }
  }
  // A run no longer listed keeps its line while its result files are there (the file may come back, or
  // belong to another shard written into this folder); a line naming no files, or files since removed, goes.
  std::size_t unlisted_dropped = 0;
  for (const std::string& stem : journal.stems()) {
    if (std::binary_search(listed_stems.begin(), listed_stems.end(), std::string_view(stem))) continue;
    const std::optional<std::string> record = journal.find(stem);
    const std::optional<ordered_json> m = parsed(record.value_or(std::string()));
    if (m && keeps_unlisted(*m, runs_dir, stem)) {
      compacted.write(*record + "\n");
    } else {
      ++unlisted_dropped;
    }
  }
  if (unlisted_dropped > 0) {
    log.line(fmt::format("{} manifest line(s) of runs no longer listed dropped: their result files are gone",
                         unlisted_dropped));
  }
  compacted.commit();
  json.write(tasks.empty() ? "],\n  \"replicates\": " : "\n  ],\n  \"replicates\": ");
  json.write(indent(reps.dump(2, ' ', false, nlohmann::json::error_handler_t::replace), "  ").substr(2) + "\n}\n");
  index.write(report::index_html_end(rep_rows));
  reps_csv.commit();
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
