// SPDX-License-Identifier: MIT
// The batch runner on mixed, broken and hostile folders: statuses, reasons, escaping, determinism, resuming.
#include <fcntl.h>
#include <sys/file.h>
#include <unistd.h>

#include <atomic>
#include <catch2/catch.hpp>
#include <fstream>
#include <nlohmann/json.hpp>
#include <set>

#include "batch/files.hpp"
#include "support/charge_balance.hpp"
#include "support/csv_parse.hpp"
#include "support/files.hpp"
#include "support/simulated_runs.hpp"
#include "support/xml_check.hpp"
#include "veq/batch/batch.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/report/html.hpp"

namespace fs = std::filesystem;
using veq::batch::RunStatus;
using veq::test::slurp;
using veq::test::write_file;

namespace {

// A strong-acid run (exact charge balance, 0.1 mol/L HCl, 20 mL, 0.1 mol/L NaOH) with the given metadata.
std::string good_log(const std::string& metadata) {
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  std::string t = metadata + "Sample volume: 20 mL\nTitrant: NaOH 0.1 mol/L\n\nVolume (mL);pH\n";
  for (int i = 0; i <= 50; ++i) t += fmt::format("{:.2f};{:.3f}\n", 0.5 * i, veq::test::pH_at_volume(s, 0.5 * i));
  return t;
}

// Simulated runs of every kind; their content is not checked, only that each is analysed.
void add_simulated(const fs::path& dir, int count, std::uint64_t seed = 11) {
  for (int i = 0; i < count; ++i) {
    const auto r = veq::test::simulate_run(seed, static_cast<std::uint64_t>(i));
    write_file(dir / r.name, r.text);
  }
}

struct Mixed {
  fs::path in, out;
  std::set<std::string> good, bad;
};

// Good, broken and hostile files together. The hostile ones: binary bytes, a 10 MB line, a file over
// the size limit (sparse), markup, quotes and spreadsheet formulas in metadata and names, and a file
// that the test deletes just before its turn.
Mixed mixed_folder(const std::string& name) {
  Mixed m;
  const fs::path root = veq::test::fresh_dir(name);
  m.in = root / "in";
  m.out = root / "out";
  add_simulated(m.in, 6);
  for (int i = 0; i < 6; ++i) m.good.insert(veq::test::simulate_run(11, static_cast<std::uint64_t>(i)).name);
  write_file(m.in / "markup.csv",
             good_log("Sample: <script>alert('x')</script> \"q\" & co\nOperator: <b onclick=x>\n"));
  write_file(m.in / "formula_id.csv", good_log("Sample: =HYPERLINK(\"http://example.invalid\",\"click\")\n"));
  write_file(m.in / "-minus.csv", good_log("Sample: @SUM(A1:A2)\n"));
  write_file(m.in / "+plus.csv", good_log("Sample: +1\n"));
  write_file(m.in / "caf\xE9 latin-1 name.csv", good_log("Sample: caf\xE9\n"));  // not UTF-8
  m.good.insert({"markup.csv", "formula_id.csv", "-minus.csv", "+plus.csv", "caf\xEF\xBF\xBD latin-1 name.csv"});
  write_file(m.in / "vanish.csv", good_log("Sample: V\n"));
  write_file(m.in / "broken_cell.csv", "Volume (mL);pH\n0;3.1\n1;abc\n2;8.7\n");
  write_file(m.in / "empty.csv", "");
  std::string binary = "Volume;pH\n";
  for (int i = 0; i < 4096; ++i) binary += static_cast<char>((i * 37) % 256);
  write_file(m.in / "binary.csv", binary);
  write_file(m.in / "long_line.txt", "Volume (mL);pH\n" + std::string(10u << 20, '7') + "\n");
  {
    write_file(m.in / "huge.csv", "");
    const int fd = ::open((m.in / "huge.csv").c_str(), O_WRONLY);
    REQUIRE(fd >= 0);
    REQUIRE(::ftruncate(fd, (off_t{65} << 20)) == 0);  // 65 MiB of holes: over the 64 MiB default limit
    ::close(fd);
  }
  m.bad = {"vanish.csv", "broken_cell.csv", "empty.csv", "binary.csv", "long_line.txt", "huge.csv"};
  return m;
}

veq::batch::BatchOptions options_for(const fs::path& in, const fs::path& out, unsigned jobs = 2) {
  veq::batch::BatchOptions o;
  o.input_dir = in;
  o.output_dir = out;
  o.jobs = jobs;
  return o;
}

veq::batch::BatchHooks vanishing(const fs::path& dir, const std::string& name) {
  veq::batch::BatchHooks h;
  h.before_run = [dir, name](const std::string& rel) {
    if (rel == name) fs::remove(dir / rel);
  };
  return h;
}

// Every output except the log (the one file with times in it).
std::map<std::string, std::string> outputs(const fs::path& out) {
  auto files = veq::test::snapshot(out);
  files.erase(std::string(veq::batch::kLogFile));
  return files;
}

bool any_temporary(const fs::path& dir) {
  for (const auto& e : fs::recursive_directory_iterator(dir)) {
    if (e.path().filename().string().find(veq::io::kTemporaryMarker) != std::string::npos) return true;
  }
  return false;
}

void check_page(const std::string& html) {
  const auto r = veq::test::check_xml(html);
  INFO(r.error);
  REQUIRE(r.ok);
  CHECK(r.elements.count("script") == 0);
  for (const auto& a : r.attributes) CHECK(a.rfind("on", 0) != 0);
  for (const auto& [b, e] : r.svg_spans) {
    const auto svg = veq::test::check_xml(std::string_view(html).substr(b, e - b));
    INFO(svg.error);
    CHECK(svg.ok);
  }
}

}  // namespace

TEST_CASE("a mixed folder: good runs analysed, every bad one listed with its reason", "[batch]") {
  const Mixed m = mixed_folder("batch_mixed");
  const auto s = veq::batch::run_batch(options_for(m.in, m.out), vanishing(m.in, "vanish.csv"));
  CHECK(s.listed == m.good.size() + m.bad.size());
  CHECK(s.processed == s.listed);
  CHECK(s.failed() == m.bad.size());
  CHECK(s.count(RunStatus::missing) == 1);
  CHECK(s.count(RunStatus::input_error) == 5);
  CHECK(s.count(RunStatus::internal_error) == 0);

  // errors.txt: one line per bad file, naming it and saying why.
  const std::string errors = slurp(m.out / "errors.txt");
  INFO(errors);
  for (const auto& [file, reason] :
       std::vector<std::pair<std::string, std::string>>{{"broken_cell.csv:3:3:", "not a number"},
                                                        {"empty.csv", "empty"},
                                                        {"binary.csv", "binary file"},
                                                        {"long_line.txt:2", "bytes long"},
                                                        {"huge.csv", "the limit is 64 MiB"},
                                                        {"vanish.csv", "no longer exists"}}) {
    const auto at = errors.find(file);
    REQUIRE(at != std::string::npos);
    const std::string line = errors.substr(at, errors.find('\n', at) - at);
    CHECK(line.find(reason) != std::string::npos);
  }
  for (const auto& g : m.good) CHECK(errors.find(g) == std::string::npos);

  // summary.csv: RFC 4180, one row per run in path order, no cell a spreadsheet would evaluate.
  const auto rows = veq::test::parse_csv(slurp(m.out / "summary.csv"));
  REQUIRE(rows.size() == s.listed + 1);
  std::vector<std::string> files;
  for (std::size_t i = 1; i < rows.size(); ++i) {
    REQUIRE(rows[i].size() == 7);
    for (const auto& cell : rows[i]) {
      INFO(cell);
      CHECK((cell.empty() || std::string("=+-@\t\r").find(cell.front()) == std::string::npos));
    }
    std::string file = rows[i][1];
    if (!file.empty() && file.front() == '\'') file.erase(0, 1);
    files.push_back(file);
    const bool good = m.good.count(file) == 1;
    INFO(file << " status " << rows[i][2]);
    CHECK((good ? (rows[i][2] == "ok" || rows[i][2] == "flagged") : m.bad.count(file) == 1));
    if (good) CHECK(std::stoi(rows[i][3]) >= 1);
    if (!good) CHECK_FALSE(rows[i][6].empty());
  }
  CHECK(std::is_sorted(files.begin(), files.end()));
  CHECK(slurp(m.out / "summary.csv").find("'=HYPERLINK(") != std::string::npos);
  CHECK(slurp(m.out / "summary.csv").find("'@SUM(A1:A2)") != std::string::npos);
  CHECK(slurp(m.out / "summary.csv").find("'-minus.csv") != std::string::npos);

  // index.html: well-formed, every text escaped, links to reports that exist.
  const std::string index = slurp(m.out / "index.html");
  check_page(index);
  CHECK(index.find("<script") == std::string::npos);
  CHECK(index.find("&lt;script&gt;alert(&#39;x&#39;)&lt;/script&gt; &quot;q&quot; &amp; co") != std::string::npos);
  std::size_t links = 0;
  for (std::size_t at = index.find("href=\"runs/"); at != std::string::npos; at = index.find("href=\"runs/", at + 1)) {
    const std::string href = index.substr(at + 6, index.find('"', at + 6) - at - 6);
    CHECK(fs::exists(m.out / href));
    check_page(slurp(m.out / href));
    ++links;
  }
  CHECK(links == m.good.size());

  // summary.json agrees.
  const auto j = nlohmann::json::parse(slurp(m.out / "summary.json"));
  CHECK(j["schema"] == "veq.batch/1");
  REQUIRE(j["runs"].size() == s.listed);
  CHECK(j["counts"]["input_error"] == 5);
  for (std::size_t i = 0; i < j["runs"].size(); ++i) CHECK(j["runs"][i]["status"] == rows[i + 1][2]);
  CHECK_FALSE(any_temporary(m.out));
}

TEST_CASE("same folder, same outputs byte for byte, whatever the number of workers", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_same");
  add_simulated(root / "in", 14);
  write_file(root / "in" / "bad.csv", "Volume (mL);pH\n0;1\n1;x\n2;3\n");
  const auto a = veq::batch::run_batch(options_for(root / "in", root / "one", 1));
  const auto b = veq::batch::run_batch(options_for(root / "in", root / "two", 2));
  const auto c = veq::batch::run_batch(options_for(root / "in", root / "four", 4));
  CHECK(a.listed == 15);
  const auto one = outputs(root / "one");
  // Summaries (with replicates.csv), the folder's marker, json and html per good run, the manifest journal.
  CHECK(one.size() == 5 + 1 + 14 * 2 + 1);
  // The journal: one record a run (bad.csv's too), in path order, each line a JSON object naming its stem.
  const std::string journal = one.at("runs/manifests.jsonl");
  std::vector<std::string> files;
  for (std::size_t at = 0; at < journal.size();) {
    const std::size_t nl = journal.find('\n', at);
    REQUIRE(nl != std::string::npos);
    const auto rec = nlohmann::json::parse(journal.substr(at, nl - at), nullptr, false);
    REQUIRE(rec.is_object());
    CHECK(rec["stem"] == veq::batch::output_stem(rec["file"].get<std::string>()));
    files.push_back(rec["file"].get<std::string>());
    at = nl + 1;
  }
  CHECK(files.size() == 15);
  CHECK(std::is_sorted(files.begin(), files.end()));
  CHECK(one == outputs(root / "two"));
  CHECK(one == outputs(root / "four"));
}

TEST_CASE("resuming: unchanged runs are kept, changed ones redone, outputs identical", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_resume");
  const fs::path in = root / "in", out = root / "out";
  add_simulated(in, 7);
  write_file(in / "r\xE9sum\xE9.csv", good_log("Sample: \xE9\n"));  // a name that is not UTF-8 resumes too
  write_file(in / "bad.csv", "");
  const auto first = veq::batch::run_batch(options_for(in, out));
  const auto clean = outputs(out);

  auto again = veq::batch::run_batch(options_for(in, out));
  CHECK(again.resumed == 9);
  CHECK(again.processed == 0);
  CHECK(outputs(out) == clean);

  // One source changed: only it is redone, and the replacement is counted.
  const auto sim = veq::test::simulate_run(11, 3);
  write_file(in / sim.name, sim.text + "# re-exported\n");
  again = veq::batch::run_batch(options_for(in, out));
  CHECK(again.processed == 1);
  CHECK(again.replaced == 1);
  CHECK(again.resumed == 8);
  write_file(in / sim.name, sim.text);
  again = veq::batch::run_batch(options_for(in, out));
  CHECK(again.processed == 1);
  CHECK(outputs(out) == clean);

  // A damaged output is noticed (its hash no longer matches) and rewritten.
  const fs::path json = out / "runs" / (veq::batch::output_stem(sim.name) + ".json");
  write_file(json, slurp(json).substr(0, 100));
  again = veq::batch::run_batch(options_for(in, out));
  CHECK(again.processed == 1);
  CHECK(outputs(out) == clean);

  // --force, other settings, another method: everything redone.
  auto o = options_for(in, out);
  o.force = true;
  CHECK(veq::batch::run_batch(o).processed == 9);
  o.force = false;
  o.settings_identity = "sample_volume=25";
  CHECK(veq::batch::run_batch(o).processed == 9);
  o.method_identity = "xxh3:0123456789abcdef";
  CHECK(veq::batch::run_batch(o).processed == 9);
  const auto j = nlohmann::json::parse(slurp(out / "summary.json"));
  CHECK(j["method"] == "xxh3:0123456789abcdef");
  CHECK(veq::batch::run_batch(options_for(in, out)).processed == 9);
  CHECK(outputs(out) == clean);
}

TEST_CASE("a stopped batch reports the rest as not run; the rerun completes it identically", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_stop");
  const fs::path in = root / "in";
  add_simulated(in, 10);
  (void)veq::batch::run_batch(options_for(in, root / "clean"));
  std::atomic<int> started{0};
  veq::batch::BatchHooks h;
  h.before_run = [&](const std::string&) { ++started; };
  h.stop_requested = [&] { return started.load() >= 3; };
  const auto s = veq::batch::run_batch(options_for(in, root / "out", 1), h);
  CHECK(s.stopped);
  CHECK(s.processed == 3);
  CHECK(s.count(RunStatus::not_run) == 7);
  CHECK(s.failed() == 7);
  const auto rows = veq::test::parse_csv(slurp(root / "out" / "summary.csv"));
  REQUIRE(rows.size() == 11);
  CHECK(rows[10][2] == "not_run");
  CHECK(slurp(root / "out" / "errors.txt").find("not processed") != std::string::npos);
  const auto rerun = veq::batch::run_batch(options_for(in, root / "out"));
  CHECK(rerun.resumed == 3);
  CHECK(rerun.processed == 7);
  CHECK(outputs(root / "out") == outputs(root / "clean"));
}

TEST_CASE("stale temporaries are swept; the output folder is protected", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_folder");
  const fs::path in = root / "in", out = root / "out";
  add_simulated(in, 3);
  (void)veq::batch::run_batch(options_for(in, out));
  const auto clean = outputs(out);
  const std::string marker(veq::io::kTemporaryMarker);
  write_file(out / ("summary.csv" + marker + "99-1"), "half");
  write_file(out / "runs" / ("x.json" + marker + "99-2"), "half");
  const std::string one = veq::test::simulate_run(11, 1).name;
  write_file(out / "runs" / (veq::batch::output_stem(one) + ".html" + marker + "99-3"), "<html");
  (void)veq::batch::run_batch(options_for(in, out));
  CHECK_FALSE(any_temporary(out));
  CHECK(outputs(out) == clean);

  // A folder holding someone else's files is refused unless forced; the files are left alone.
  const fs::path theirs = root / "theirs";
  write_file(theirs / "thesis.docx", "precious");
  CHECK_THROWS_AS(veq::batch::run_batch(options_for(in, theirs)), veq::InputError);
  auto forced = options_for(in, theirs);
  forced.force = true;
  CHECK(veq::batch::run_batch(forced).listed == 3);
  CHECK(slurp(theirs / "thesis.docx") == "precious");
  // The input folder is never the output folder.
  CHECK_THROWS_AS(veq::batch::run_batch(options_for(in, in)), veq::InputError);
  // A second batch into a folder in use is refused (the first holds the lock).
  const int fd = ::open((out / ".veq-batch").c_str(), O_RDWR);
  REQUIRE(fd >= 0);
  REQUIRE(::flock(fd, LOCK_EX | LOCK_NB) == 0);
  try {
    (void)veq::batch::run_batch(options_for(in, out));
    FAIL("no error");
  } catch (const veq::InputError& e) {
    CHECK(e.message().find("another veq batch") != std::string::npos);
  }
  ::close(fd);
  // A missing input folder is reported before anything is created.
  CHECK_THROWS_AS(veq::batch::run_batch(options_for(root / "nope", root / "never")), veq::InputError);
  CHECK_FALSE(fs::exists(root / "never"));
}

TEST_CASE("the manifest journal: a line cut short is dropped, the latest record stands, others are kept", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_journal");
  const fs::path path = root / "manifests.jsonl";
  using veq::batch::detail::Journal;
  {
    Journal j(path);
    CHECK(j.stems().empty());
    j.append("a-1", R"({"stem":"a-1","v":1})");
    j.append("b-2", R"({"stem":"b-2","v":2})");
    j.append("a-1", R"({"stem":"a-1","v":3})");
    CHECK(j.find("a-1") == std::optional<std::string>(R"({"stem":"a-1","v":3})"));
    CHECK(j.find("b-2") == std::optional<std::string>(R"({"stem":"b-2","v":2})"));
    CHECK_FALSE(j.find("c-3").has_value());
    CHECK_THROWS_AS(j.append("a-1", R"({"stem":"b-2"})"), std::logic_error);  // a record names its own stem
    CHECK_THROWS_AS(j.append("a-1", "{\"stem\":\"a-1\",\n}"), std::logic_error);
  }
  // What a kill in the middle of a write leaves: the last line without its newline; and a line of rubbish.
  const std::string whole = slurp(path);
  write_file(path, whole + "rubbish\n" + R"({"stem":"c-3","v":)");
  {
    Journal j(path);
    CHECK(j.cut_short());
    CHECK(j.dropped() == 1);
    CHECK(j.stems() == std::vector<std::string>{"a-1", "b-2"});
    CHECK(slurp(path) == whole + "rubbish\n");  // cut back to its last whole line
    j.append("c-3", R"({"stem":"c-3","v":4})");
    CHECK(j.find("c-3") == std::optional<std::string>(R"({"stem":"c-3","v":4})"));
  }
  {
    const Journal j(path);
    CHECK_FALSE(j.cut_short());
    CHECK(j.stems() == std::vector<std::string>{"a-1", "b-2", "c-3"});
    CHECK(j.find("a-1") == std::optional<std::string>(R"({"stem":"a-1","v":3})"));
  }

  // In a batch: the records of runs no longer in the folder are kept (their results stay in runs/), so the
  // file put back is not done again; the folders of the layout before the journal are removed.
  const fs::path in = root / "in", out = root / "out";
  add_simulated(in, 3);
  const std::string gone = veq::test::simulate_run(11, 1).name;
  (void)veq::batch::run_batch(options_for(in, out));
  const auto clean = outputs(out);
  const std::string kept = slurp(in / gone);
  fs::remove(in / gone);
  const auto two = veq::batch::run_batch(options_for(in, out));
  CHECK(two.listed == 2);
  CHECK(two.resumed == 2);
  // The same records, the gone run's now after the listed ones.
  const auto lines_of = [](const std::string& text) {
    std::multiset<std::string> lines;
    for (std::size_t at = 0, nl = 0; (nl = text.find('\n', at)) != std::string::npos; at = nl + 1)
      lines.insert(text.substr(at, nl - at));
    return lines;
  };
  const std::string journal = slurp(out / "runs" / "manifests.jsonl");
  CHECK(lines_of(journal) == lines_of(clean.at("runs/manifests.jsonl")));
  CHECK(Journal::stem_of(journal.substr(journal.rfind('\n', journal.size() - 2) + 1)) == veq::batch::output_stem(gone));
  CHECK(fs::exists(out / "runs" / (veq::batch::output_stem(gone) + ".json")));
  write_file(in / gone, kept);
  write_file(out / "runs" / "old_layout.csv-0123456789abcdef" / "manifest.json", "{}");
  const auto three = veq::batch::run_batch(options_for(in, out));
  CHECK(three.resumed == 3);
  CHECK(three.processed == 0);
  CHECK_FALSE(fs::exists(out / "runs" / "old_layout.csv-0123456789abcdef"));
  CHECK(outputs(out) == clean);
  // Gone again, and its result files removed too: its line goes (as does a line naming no files).
  fs::remove(in / gone);
  fs::remove(out / "runs" / (veq::batch::output_stem(gone) + ".json"));
  fs::remove(out / "runs" / (veq::batch::output_stem(gone) + ".html"));
  {
    std::ofstream(out / "runs" / "manifests.jsonl", std::ios::app) << R"({"stem":"made-up","schema":"x"})"
                                                                   << "\n";
  }
  (void)veq::batch::run_batch(options_for(in, out));
  const auto left = lines_of(slurp(out / "runs" / "manifests.jsonl"));
  CHECK(left.size() == 2);
  for (const auto& l : left) CHECK(Journal::stem_of(l) != veq::batch::output_stem(gone));
}

TEST_CASE("exceptions inside a run become its status: input errors and internal errors", "[batch]") {
  const fs::path root = veq::test::fresh_dir("batch_exceptions");
  add_simulated(root / "in", 4);
  const std::string first = veq::test::simulate_run(11, 0).name, second = veq::test::simulate_run(11, 1).name;
  auto o = options_for(root / "in", root / "out");
  o.configure = [&](veq::Run& run) -> veq::AnalyzeOptions {
    if (run.source == first) throw std::runtime_error("boom");
    if (run.source == second) throw veq::InputError({"--buffers", 0, 0}, "implausible slope");
    return {};
  };
  const auto s = veq::batch::run_batch(o);
  CHECK(s.count(RunStatus::internal_error) == 1);
  CHECK(s.count(RunStatus::input_error) == 1);
  CHECK(s.count(RunStatus::ok) + s.count(RunStatus::flagged) == 2);
  const std::string errors = slurp(root / "out" / "errors.txt");
  CHECK(errors.find(first + ": internal error") != std::string::npos);
  CHECK(errors.find("boom") != std::string::npos);
  CHECK(errors.find("implausible slope") != std::string::npos);
  // An internal error leaves no manifest, so the next batch tries the run again; an input error is
  // a result like any other and stands while source and settings are unchanged.
  o.configure = nullptr;
  const auto next = veq::batch::run_batch(o);
  CHECK(next.processed == 1);
  CHECK(next.count(RunStatus::internal_error) == 0);
  CHECK(next.count(RunStatus::input_error) == 1);
}

TEST_CASE("batch options, statuses and report options: defaults and numbers are pinned", "[options]") {
  const veq::batch::BatchOptions b;
  CHECK(b.jobs == 0);
  CHECK_FALSE(b.force);
  CHECK(b.html_reports);
  CHECK(b.method_identity.empty());
  CHECK(b.settings_identity.empty());
  CHECK(b.list.patterns == std::vector<std::string>{"*.csv", "*.txt", "*.tsv"});
  CHECK_FALSE(b.list.recursive);
  CHECK(b.list.shard.index == 1);
  CHECK(b.list.shard.count == 1);
  CHECK(b.ingest.max_file_bytes == (std::uint64_t{64} << 20));
  const veq::report::HtmlOptions h;
  CHECK(h.index_href.empty());
  CHECK(h.plot_width_px == 720);
  CHECK(h.plot_height_px == 360);
  // Stable numbers and names (never reused).
  const std::vector<std::pair<RunStatus, std::string>> table = {{RunStatus::ok, "ok"},
                                                                {RunStatus::flagged, "flagged"},
                                                                {RunStatus::no_endpoint, "no_endpoint"},
                                                                {RunStatus::input_error, "input_error"},
                                                                {RunStatus::missing, "missing"},
                                                                {RunStatus::output_error, "output_error"},
                                                                {RunStatus::internal_error, "internal_error"},
                                                                {RunStatus::not_run, "not_run"},
                                                                {RunStatus::no_result, "no_result"},
                                                                {RunStatus::out_of_spec, "out_of_spec"}};
  for (std::size_t i = 0; i < table.size(); ++i) {
    CHECK(static_cast<int>(table[i].first) == static_cast<int>(i));
    CHECK(veq::batch::to_string(table[i].first) == table[i].second);
    CHECK(veq::batch::status_from_string(table[i].second) == table[i].first);
  }
  CHECK_FALSE(veq::batch::status_from_string("fine").has_value());
}
