// SPDX-License-Identifier: MIT
// The real `veq batch` as a child process: SIGKILL at random moments, SIGTERM, exit codes, quiet stderr.
#include <fcntl.h>
#include <signal.h>
#include <spawn.h>
#include <stdlib.h>
#include <sys/wait.h>
#include <unistd.h>

#include <catch2/catch.hpp>
#include <chrono>
#include <nlohmann/json.hpp>
#include <random>
#include <sstream>
#include <thread>

#include "support/charge_balance.hpp"
#include "support/files.hpp"
#include "support/simulated_runs.hpp"
#include "support/xml_check.hpp"
#include "veq/batch/batch.hpp"
#include "veq/core/atomic_file.hpp"

extern char** environ;

namespace fs = std::filesystem;
using veq::test::slurp;
using Clock = std::chrono::steady_clock;

namespace {

// Starts the veq binary with args, stdout and stderr to files; returns its pid.
pid_t spawn(const std::vector<std::string>& args, const fs::path& out_file, const fs::path& err_file) {
  std::vector<std::string> all = {VEQ_BINARY};
  all.insert(all.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  posix_spawn_file_actions_t fa;
  posix_spawn_file_actions_init(&fa);
  posix_spawn_file_actions_addopen(&fa, STDOUT_FILENO, out_file.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  posix_spawn_file_actions_addopen(&fa, STDERR_FILENO, err_file.c_str(), O_WRONLY | O_CREAT | O_TRUNC, 0644);
  pid_t pid = 0;
  const int rc = posix_spawn(&pid, VEQ_BINARY, &fa, nullptr, argv.data(), environ);
  posix_spawn_file_actions_destroy(&fa);
  REQUIRE(rc == 0);
  return pid;
}

struct Exit {
  bool signalled = false;
  int code = -1;  // exit status, or the signal number when signalled
};

Exit wait_for(pid_t pid) {
  int status = 0;
  REQUIRE(::waitpid(pid, &status, 0) == pid);
  if (WIFSIGNALED(status)) return {true, WTERMSIG(status)};
  return {false, WEXITSTATUS(status)};
}

struct Run {
  int code;
  std::string out, err;
};

Run run_veq(const std::vector<std::string>& args, const fs::path& scratch) {
  const pid_t pid = spawn(args, scratch / "stdout.txt", scratch / "stderr.txt");
  const Exit e = wait_for(pid);
  REQUIRE_FALSE(e.signalled);
  return {e.code, slurp(scratch / "stdout.txt"), slurp(scratch / "stderr.txt")};
}

std::map<std::string, std::string> outputs(const fs::path& out) {
  auto files = veq::test::snapshot(out);
  files.erase(std::string(veq::batch::kLogFile));
  return files;
}

// A folder of simulated runs of every kind plus two bad files.
fs::path make_input(const fs::path& root, int runs) {
  const fs::path in = root / "in";
  for (int i = 0; i < runs; ++i) {
    const auto r = veq::test::simulate_run(5, static_cast<std::uint64_t>(i));
    veq::test::write_file(in / r.name, r.text);
  }
  veq::test::write_file(in / "bad_cell.csv", "Volume (mL);pH\n0;3.1\n1;abc\n2;8.7\n");
  veq::test::write_file(in / "empty.txt", "");
  return in;
}

// After a kill, whatever is in place is whole: every JSON parses, every HTML page is well-formed.
void check_whole(const fs::path& out) {
  for (const auto& [rel, bytes] : veq::test::snapshot(out)) {
    if (rel.find(veq::io::kTemporaryMarker) != std::string::npos) continue;  // swept by the next batch
    INFO(rel);
    if (rel.size() > 5 && rel.substr(rel.size() - 5) == ".json") {
      CHECK_FALSE(nlohmann::json::parse(bytes, nullptr, false).is_discarded());
    } else if (rel.size() > 5 && rel.substr(rel.size() - 5) == ".html") {
      const auto x = veq::test::check_xml(bytes);
      INFO(x.error);
      CHECK(x.ok);
    } else if (rel.size() > 6 && rel.substr(rel.size() - 6) == ".jsonl") {
      // The manifest journal: every whole line a JSON object; only a last line may be cut short (its
      // newline missing), and the next batch drops it.
      for (std::size_t at = 0, nl = 0; (nl = bytes.find('\n', at)) != std::string::npos; at = nl + 1) {
        CHECK(nlohmann::json::parse(bytes.substr(at, nl - at), nullptr, false).is_object());
      }
    }
  }
}

bool any_temporary(const fs::path& dir) {
  for (const auto& e : fs::recursive_directory_iterator(dir)) {
    if (e.path().filename().string().find(veq::io::kTemporaryMarker) != std::string::npos) return true;
  }
  return false;
}

}  // namespace

TEST_CASE("SIGKILL at random moments, then a rerun: byte-identical to a clean batch, no temporaries",
          "[batch][cli][kill]") {
  const fs::path root = veq::test::fresh_dir("batch_kill");
  const fs::path in = make_input(root, 36);
  const auto t0 = Clock::now();
  const Run clean = run_veq({"batch", in.string(), "--out", (root / "clean").string(), "--jobs", "2"}, root);
  const double clean_s = std::chrono::duration<double>(Clock::now() - t0).count();
  INFO(clean.err);
  REQUIRE(clean.code == 1);  // two bad files
  const auto expected = outputs(root / "clean");

  const unsigned seed = std::random_device{}();
  INFO("kill moments from seed " << seed << ", clean batch " << clean_s << " s");
  std::mt19937 rng(seed);
  // Moments spread over the whole batch, its start and its summary phase at the end included.
  std::uniform_real_distribution<double> when(0.0, 1.1 * clean_s);
  std::vector<double> moments = {0.002, 0.5 * clean_s, 0.97 * clean_s};
  for (int k = 0; k < 5; ++k) moments.push_back(when(rng));
  const fs::path out = root / "killed";
  int killed = 0;
  for (const double m : moments) {
    const pid_t pid =
        spawn({"batch", in.string(), "--out", out.string(), "--jobs", "2"}, root / "k.out", root / "k.err");
    std::this_thread::sleep_for(std::chrono::duration<double>(m));
    ::kill(pid, SIGKILL);
    const Exit e = wait_for(pid);
    killed += e.signalled ? 1 : 0;
    if (fs::exists(out)) check_whole(out);
  }
  INFO(killed << " of " << moments.size() << " runs were killed before they ended");
  CHECK(killed >= 1);
  const Run rerun = run_veq({"batch", in.string(), "--out", out.string(), "--jobs", "2"}, root);
  CHECK(rerun.code == 1);
  CHECK_FALSE(any_temporary(out));
  const auto got = outputs(out);
  CHECK(got.size() == expected.size());
  for (const auto& [name, bytes] : expected) {
    INFO(name);
    REQUIRE(got.count(name) == 1);
    CHECK(got.at(name) == bytes);
  }
}

TEST_CASE("SIGTERM stops after the runs in flight: summaries written, clear message, exit 1", "[batch][cli]") {
  const fs::path root = veq::test::fresh_dir("batch_term");
  const fs::path in = make_input(root, 60);
  const fs::path out = root / "out";
  const pid_t pid = spawn({"batch", in.string(), "--out", out.string(), "--jobs", "1"}, root / "t.out", root / "t.err");
  // Wait until the log shows a finished run, so that the handlers are installed.
  const auto deadline = Clock::now() + std::chrono::seconds(60);
  while (Clock::now() < deadline) {
    const std::string log = slurp(out / "batch.log");
    if (log.find(" ms)") != std::string::npos) break;
    std::this_thread::sleep_for(std::chrono::milliseconds(1));
  }
  ::kill(pid, SIGTERM);
  const Exit e = wait_for(pid);
  REQUIRE_FALSE(e.signalled);
  CHECK(e.code == 1);
  const std::string err = slurp(root / "t.err");
  INFO(err);
  CHECK(err.find("stopping") != std::string::npos);
  CHECK(err.find("stopped early") != std::string::npos);
  const auto j = nlohmann::json::parse(slurp(out / "summary.json"));
  CHECK(j["runs"].size() == 62);
  CHECK(j["counts"]["not_run"].get<int>() > 0);
  // The rest is done by the next batch, as if nothing had happened.
  const Run rerun = run_veq({"batch", in.string(), "--out", out.string()}, root);
  CHECK(rerun.code == 1);
  const Run clean = run_veq({"batch", in.string(), "--out", (root / "clean").string()}, root);
  CHECK(outputs(out) == outputs(root / "clean"));
}

TEST_CASE("veq batch: exit codes, output, and a quiet stderr when it is not a terminal", "[batch][cli]") {
  const fs::path root = veq::test::fresh_dir("batch_cli");
  const fs::path good = root / "good";
  for (int i = 0; i < 3; ++i) {
    const auto r = veq::test::simulate_run(5, static_cast<std::uint64_t>(i));
    veq::test::write_file(good / r.name, r.text);
  }
  const Run ok = run_veq({"batch", good.string(), "--out", (root / "o1").string()}, root);
  INFO(ok.err);
  CHECK(ok.code == 0);
  CHECK(ok.out.find("index: " + (root / "o1" / "index.html").string()) != std::string::npos);
  CHECK(ok.err.empty());  // no progress: stderr is a file
  // Rerun: nothing to do, same exit code.
  const Run again = run_veq({"batch", good.string(), "--out", (root / "o1").string()}, root);
  CHECK(again.code == 0);
  CHECK(again.out.find("kept unchanged 3") != std::string::npos);
  // Usage errors: exit 2 with a message naming the problem.
  CHECK(run_veq({"batch", (root / "nope").string(), "--out", (root / "o2").string()}, root).code == 2);
  CHECK(run_veq({"batch", good.string()}, root).code == 2);
  const Run shard = run_veq({"batch", good.string(), "--out", (root / "o3").string(), "--shard", "3/2"}, root);
  CHECK(shard.code == 2);
  CHECK(shard.err.find("--shard") != std::string::npos);
  const Run method =
      run_veq({"batch", good.string(), "--out", (root / "o4").string(), "--method", "/nonexistent.toml"}, root);
  CHECK(method.code == 2);
  CHECK(method.err.find("/nonexistent.toml") != std::string::npos);
  // A method file is applied, and recorded by its content hash.
  veq::test::write_file(root / "m.toml",
                        "name = \"demo\"\n[sample]\nvolume_mL = 20\n[titrant]\nconcentration_mol_L = 0.1\n"
                        "[[result]]\nname = \"acid\"\nunit = \"mol/L\"\n");
  const Run with_method =
      run_veq({"batch", good.string(), "--out", (root / "o5").string(), "--method", (root / "m.toml").string()}, root);
  CHECK(with_method.code == 0);
  const auto summary = nlohmann::json::parse(slurp(root / "o5" / "summary.json"));
  CHECK(summary["method"].get<std::string>().rfind("xxh3:", 0) == 0);
  CHECK(slurp(root / "o5" / "summary.csv").find("acid = ") != std::string::npos);  // the result column
  // Shards 1/2 and 2/2 together hold every run once.
  (void)run_veq({"batch", good.string(), "--out", (root / "s1").string(), "--shard", "1/2"}, root);
  (void)run_veq({"batch", good.string(), "--out", (root / "s2").string(), "--shard", "2/2"}, root);
  const auto n1 = nlohmann::json::parse(slurp(root / "s1" / "summary.json"))["runs"].size();
  const auto n2 = nlohmann::json::parse(slurp(root / "s2" / "summary.json"))["runs"].size();
  CHECK(n1 + n2 == 3);
}

TEST_CASE("progress on stderr when it is a terminal: done/total, rate, time left", "[batch][cli]") {
  const fs::path root = veq::test::fresh_dir("batch_tty");
  const fs::path in = make_input(root, 8);
  const int master = ::posix_openpt(O_RDWR | O_NOCTTY);
  REQUIRE(master >= 0);
  REQUIRE(::grantpt(master) == 0);
  REQUIRE(::unlockpt(master) == 0);
  const std::string slave = ::ptsname(master);
  std::vector<std::string> all = {VEQ_BINARY, "batch", in.string(), "--out", (root / "out").string()};
  std::vector<char*> argv;
  for (auto& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  posix_spawn_file_actions_t fa;
  posix_spawn_file_actions_init(&fa);
  posix_spawn_file_actions_addopen(&fa, STDOUT_FILENO, "/dev/null", O_WRONLY, 0);
  posix_spawn_file_actions_addopen(&fa, STDERR_FILENO, slave.c_str(), O_RDWR | O_NOCTTY, 0);
  pid_t pid = 0;
  REQUIRE(posix_spawn(&pid, VEQ_BINARY, &fa, nullptr, argv.data(), environ) == 0);
  posix_spawn_file_actions_destroy(&fa);
  const Exit e = wait_for(pid);
  CHECK(e.code == 1);  // the two bad files
  std::string seen;
  char buf[4096];
  ::fcntl(master, F_SETFL, O_NONBLOCK);
  for (ssize_t n; (n = ::read(master, buf, sizeof buf)) > 0;) seen.append(buf, static_cast<std::size_t>(n));
  ::close(master);
  INFO(seen);
  // The last progress line is drawn once the runs are done.
  CHECK(seen.find("10/10 runs") != std::string::npos);
  CHECK(seen.find("runs/s") != std::string::npos);
  CHECK(seen.find("left") != std::string::npos);
}

TEST_CASE("veq analyze --html writes the report atomically and never replaces one without --force", "[cli][report]") {
  const fs::path root = veq::test::fresh_dir("analyze_html");
  const auto r = veq::test::simulate_run(5, 0);
  veq::test::write_file(root / r.name, r.text);
  const fs::path html = root / "report.html";
  const Run first = run_veq({"analyze", (root / r.name).string(), "--html", html.string(), "-q"}, root);
  CHECK(first.code == 0);
  const auto x = veq::test::check_xml(slurp(html));
  INFO(x.error);
  CHECK(x.ok);
  veq::test::write_file(html, "precious");
  const Run second = run_veq({"analyze", (root / r.name).string(), "--html", html.string(), "-q"}, root);
  CHECK(second.code == 2);
  CHECK(slurp(html) == "precious");
  CHECK(run_veq({"analyze", (root / r.name).string(), "--html", html.string(), "-q", "--force"}, root).code == 0);
  CHECK(veq::test::check_xml(slurp(html)).ok);
}

TEST_CASE("veq batch with a method: results and replicate statistics in the summaries", "[batch][method]") {
  const fs::path root = veq::test::fresh_dir("batch_replicates");
  // Three replicates of one sample (same sample id) and one of another: 0.1 mol/L HCl, 20 mL
  // (the exact strong-acid curve of tests/support; Veq = 20.00 mL by stoichiometry).
  veq::test::Sample s;
  s.V0_mL = 20.0;
  s.strong_acid = 0.1;
  s.titrant = 0.1;
  auto write_run = [&](const std::string& name, const std::string& id, double noise_seed) {
    std::ostringstream f;
    f << "Sample: " << id << "\nVolume (mL);pH\n";
    for (int i = 0; i <= 300; ++i) {
      const double v = 0.1 * i;
      f << v << ";" << veq::test::pH_at_volume(s, v) + 0.001 * std::sin(noise_seed * (i + 1)) << "\n";
    }
    veq::test::write_file(root / "in" / name, f.str());
  };
  write_run("a1.csv", "LOT-7", 1.0);
  write_run("a2.csv", "LOT-7", 2.0);
  write_run("a3.csv", "LOT-7", 3.0);
  write_run("b1.csv", "LOT-8", 4.0);
  // A copy of a1 under another name: the same measurement, not a fourth replicate (common practice,
  // no source: a replicate is a separate portion titrated again).
  fs::copy_file(root / "in" / "a1.csv", root / "in" / "a1_copy.csv");
  veq::test::write_file(root / "m.toml",
                        "name = \"acid\"\n[sample]\nvolume_mL = 20\n[titrant]\nconcentration_mol_L = 0.1\n"
                        "[[result]]\nname = \"HCl\"\nunit = \"mol/L\"\n[acceptance]\nmax_rsd_percent = 0.5\n");
  const Run r = run_veq({"batch",
                         (root / "in").string(),
                         "--out",
                         (root / "out").string(),
                         "--method",
                         (root / "m.toml").string(),
                         "--sample-volume",
                         "20"},
                        root);
  INFO(r.err);
  CHECK(r.code == 0);
  const auto summary = nlohmann::json::parse(slurp(root / "out" / "summary.json"));
  REQUIRE(summary["replicates"].size() == 1);  // LOT-8 has a single run
  const auto& g = summary["replicates"][0];
  CHECK(g["group"] == "LOT-7");
  CHECK(g["n"] == 3);
  REQUIRE(g["duplicates"].size() == 1);
  CHECK(g["duplicates"][0]["file"] == "a1_copy.csv");
  CHECK(g["duplicates"][0]["duplicate_of"] == "a1.csv");
  CHECK(slurp(root / "out" / "errors.txt").find("a1_copy.csv: the same content as a1.csv (the first in path order)") !=
        std::string::npos);
  CHECK(std::fabs(g["mean"].get<double>() - 0.1) < 1e-3);  // 0.1 mol/L HCl (stoichiometry)
  CHECK(g["rsd_acceptance"] == "passed");
  CHECK(slurp(root / "out" / "replicates.csv").find("LOT-7,HCl,mol/L,3,") != std::string::npos);
  CHECK(slurp(root / "out" / "index.html").find("<h2>Replicates</h2>") != std::string::npos);
  CHECK(summary["runs"][0]["results"][0]["name"] == "HCl");
  // Each report carries the reported result, its budget and the indicators, and stays well-formed.
  const std::string report = slurp(root / "out" / summary["runs"][0]["report"].get<std::string>());
  CHECK(report.find("Reported results") != std::string::npos);
  CHECK(report.find("Uncertainty budget") != std::string::npos);
  CHECK(report.find("Colour indicators") != std::string::npos);
  const auto x = veq::test::check_xml(report);
  INFO(x.error);
  CHECK(x.ok);
}

namespace {

// Like run_veq, with a limit on the size of any file the child writes (RLIMIT_FSIZE, via
// util-linux prlimit): writes past it fail with EFBIG, as on a full disk.
Run run_veq_file_limit(const std::vector<std::string>& args, const fs::path& scratch, std::size_t max_file_bytes) {
  std::string cmd = "exec prlimit --fsize=" + std::to_string(max_file_bytes) + " '" VEQ_BINARY "'";
  for (const auto& a : args) cmd += " '" + a + "'";
  cmd += " >'" + (scratch / "stdout.txt").string() + "' 2>'" + (scratch / "stderr.txt").string() + "'";
  const int status = std::system(cmd.c_str());
  return {WIFEXITED(status) ? WEXITSTATUS(status) : -1, slurp(scratch / "stdout.txt"), slurp(scratch / "stderr.txt")};
}

}  // namespace

TEST_CASE("a full disk during a batch: failed writes are reported, nothing corrupt, the rerun is clean",
          "[batch][cli][fault]") {
  const fs::path root = veq::test::fresh_dir("batch_full_disk");
  const fs::path in = make_input(root, 12);
  REQUIRE(run_veq({"batch", in.string(), "--out", (root / "clean").string()}, root).code == 1);  // two bad files
  const auto clean = outputs(root / "clean");
  // Every file is limited to 20 kB: the HTML reports (tens of kB) cannot be written.
  const Run full = run_veq_file_limit({"batch", in.string(), "--out", (root / "out").string()}, root, 20000);
  INFO(full.out << full.err);
  CHECK(full.code == 1);  // runs failed; the batch itself went on to the end
  const std::string errors = slurp(root / "out" / "errors.txt");
  CHECK(errors.find("[output_error]") != std::string::npos);
  CHECK(errors.find("File too large") != std::string::npos);
  CHECK_FALSE(any_temporary(root / "out"));  // failed writes leave no temporaries behind
  check_whole(root / "out");                 // and nothing half-written under a final name
  // With room again, the rerun gives exactly what a batch that never failed gives.
  (void)run_veq({"batch", in.string(), "--out", (root / "out").string()}, root);
  CHECK(outputs(root / "out") == clean);

  // The same on a real full file system, where this machine lets us mount a small tmpfs (as root).
  const fs::path mnt = root / "tmpfs";
  fs::create_directories(mnt);
  if (std::system(("mount -t tmpfs -o size=256k tmpfs '" + mnt.string() + "' 2>/dev/null").c_str()) == 0) {
    const Run enospc = run_veq({"batch", in.string(), "--out", (mnt / "out").string()}, root);
    INFO(enospc.out << enospc.err);
    CHECK(enospc.code != 0);
    const std::string said =
        enospc.out + enospc.err +
        (fs::exists(mnt / "out" / "errors.txt") ? slurp(mnt / "out" / "errors.txt") : std::string());
    CHECK(said.find("No space left on device") != std::string::npos);
    if (fs::exists(mnt / "out")) {
      CHECK_FALSE(any_temporary(mnt / "out"));
      check_whole(mnt / "out");
    }
    CHECK(std::system(("umount '" + mnt.string() + "'").c_str()) == 0);
  }
}

TEST_CASE("an output folder that cannot be written: a clear error naming it, exit 2", "[batch][cli][fault]") {
  const fs::path root = veq::test::fresh_dir("batch_readonly");
  const fs::path in = make_input(root, 2);
  // /proc is a read-only file system for files like these, whatever the user (root ignores permission bits).
  const Run r = run_veq({"batch", in.string(), "--out", "/proc/self/veq-out"}, root);
  CHECK(r.code == 2);
  CHECK(r.err.find("/proc/self/veq-out") != std::string::npos);
  CHECK(r.err.find("veq: error:") != std::string::npos);
}
