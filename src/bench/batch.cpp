// SPDX-License-Identifier: MIT
// Batch benchmark: simulated runs of mixed kinds; time per stage, runs per second of `veq batch`, peak memory.
//
// Usage: veq_bench_batch [--runs N] [--repeat R] [--fit-repeat F] [--dir DIR] [--keep] [--stages-only]
// Generates N runs (default 10000, 150-400 readings each, mixed kinds; tests/support/simulated_runs.hpp)
// into DIR/in once, then
//   1. times each stage in this process on one thread over every run (read, ingest, prepare,
//      derivative endpoints, Gran + consensus, JSON, HTML report; with --fit-repeat F the fit F times per
//      run, its shortest time counted);
//   2. runs the real `veq batch` as a child process into fresh output folders: 1 and 2 workers
//      without HTML reports (R times each, default 3), then 1 and 2 workers with them, then once more
//      to resume (nothing to redo); wall time from the parent, CPU time and peak resident memory of
//      the child from wait4();
//   3. runs `veq batch` on a tenth of the runs for peak memory against the number of runs.
// Output folders are new each time and removed at the end (--keep keeps them): ext4 creates files
// slowly for a few minutes after many were deleted nearby (it avoids reusing recently freed inodes),
// so deleting a previous output just before a measurement would time the file system, not veq.
// Leave a few minutes between two benchmarks for the same reason.
#include <fcntl.h>
#include <fmt/format.h>
#include <spawn.h>
#include <sys/resource.h>
#include <sys/wait.h>

#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <string>
#include <thread>
#include <vector>

#include "support/simulated_runs.hpp"
#include "veq/analyze.hpp"
#include "veq/batch/listing.hpp"
#include "veq/fit/fit.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/gran.hpp"
#include "veq/signal/prepare.hpp"

extern char** environ;

namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

namespace {

constexpr std::uint64_t kSeed = 20240611;

double seconds_since(Clock::time_point t) {
  return std::chrono::duration<double>(Clock::now() - t).count();
}

std::string slurp(const fs::path& p) {
  std::ifstream in(p, std::ios::binary);
  return {std::istreambuf_iterator<char>(in), std::istreambuf_iterator<char>()};
}

// Writes runs [0, n) into dir (skipped when a stamp says they are there already).
void generate(const fs::path& dir, std::size_t n) {
  const fs::path stamp = dir / ".generated";
  const std::string want = fmt::format("seed {} runs {}\n", kSeed, n);
  if (fs::exists(stamp) && slurp(stamp) == want) return;
  fs::remove_all(dir);
  fs::create_directories(dir);
  const auto t0 = Clock::now();
  const unsigned threads = std::max(1u, std::thread::hardware_concurrency());
  std::vector<std::thread> pool;
  for (unsigned k = 0; k < threads; ++k) {
    pool.emplace_back([&, k] {
      for (std::size_t i = k; i < n; i += threads) {
        const auto r = veq::test::simulate_run(kSeed, i);
        std::ofstream(dir / r.name, std::ios::binary) << r.text;
      }
    });
  }
  for (auto& t : pool) t.join();
  std::ofstream(stamp) << want;
  std::cerr << fmt::format("generated {} runs in {} ({:.1f} s)\n", n, dir.string(), seconds_since(t0));
}

struct Child {
  double wall_s = 0.0;
  double cpu_s = 0.0;  // user + system time of the child
  long peak_rss_kB = 0;
  int code = -1;
};

Child run_veq(const std::vector<std::string>& args) {
  std::vector<std::string> all = {VEQ_BINARY};
  all.insert(all.end(), args.begin(), args.end());
  std::vector<char*> argv;
  for (auto& a : all) argv.push_back(a.data());
  argv.push_back(nullptr);
  posix_spawn_file_actions_t fa;
  posix_spawn_file_actions_init(&fa);
  posix_spawn_file_actions_addopen(&fa, 1, "/dev/null", O_WRONLY, 0);
  const auto t0 = Clock::now();
  pid_t pid = 0;
  if (posix_spawn(&pid, VEQ_BINARY, &fa, nullptr, argv.data(), environ) != 0) {
    std::cerr << "cannot start " << VEQ_BINARY << "\n";
    std::exit(3);
  }
  posix_spawn_file_actions_destroy(&fa);
  int status = 0;
  struct rusage ru {};
  ::wait4(pid, &status, 0, &ru);
  Child c;
  c.wall_s = seconds_since(t0);
  c.peak_rss_kB = ru.ru_maxrss;
  c.cpu_s = static_cast<double>(ru.ru_utime.tv_sec + ru.ru_stime.tv_sec) +
            1e-6 * static_cast<double>(ru.ru_utime.tv_usec + ru.ru_stime.tv_usec);
  c.code = WIFEXITED(status) ? WEXITSTATUS(status) : -1;
  return c;
}

// The 1-minute load average: other work on the machine while a figure was taken.
std::string load_average() {
  std::string l = slurp("/proc/loadavg");
  return l.substr(0, l.find(' '));
}

struct Stages {
  double read = 0, ingest = 0, prepare = 0, endpoints = 0, gran = 0, fit = 0, rest = 0, json = 0, html = 0;
  std::size_t runs = 0, points = 0, endpoints_found = 0, failed = 0;
  std::map<std::string, std::pair<double, std::size_t>> fit_by_kind;  // file-name kind -> (seconds, runs)
};

// The stages of veq::analyze() one by one (as src/analyze.cpp calls them), timed over every run.
Stages time_stages(const std::vector<fs::path>& files, int fit_repeat) {
  Stages s;
  for (const auto& f : files) {
    auto t = Clock::now();
    const std::string bytes = slurp(f);
    (void)veq::batch::hash64(bytes);
    s.read += seconds_since(t);
    t = Clock::now();
    veq::Run run;
    try {
      run = veq::ingest::parse_run(bytes, f.filename().string());
    } catch (const veq::InputError&) {
      ++s.failed;
      continue;
    }
    s.ingest += seconds_since(t);
    s.points += run.volume_mL.size();
    t = Clock::now();
    veq::Analysis a;
    a.curve = veq::signal::prepare(run, {});
    s.prepare += seconds_since(t);
    t = Clock::now();
    a.endpoints = veq::signal::find_endpoints(a.curve, {}, run.source);
    s.endpoints += seconds_since(t);
    t = Clock::now();
    a.warnings = run.warnings;
    veq::signal::GranInputs gi;
    gi.sample_volume_mL = run.facts.sample_volume_mL;
    gi.titrant_conc_mol_L = run.facts.titrant_conc_mol_L;
    gi.temperature_C = a.curve.temperature_C;
    a.gran = veq::signal::gran_endpoints(a.curve, a.endpoints.endpoints, gi, {}, a.warnings, run.source);
    for (std::size_t i = 0; i < a.endpoints.endpoints.size(); ++i) {
      const auto c = veq::signal::consensus(a.endpoints.endpoints[i], a.gran[i]);
      a.endpoints.endpoints[i].volume_mL = c.volume_mL;
      a.endpoints.endpoints[i].uncertainty_mL = c.uncertainty_mL;
    }
    s.gran += seconds_since(t);
    s.endpoints_found += a.endpoints.endpoints.size();
    // The charge-balance fit, with the inputs veq::analyze() gives it.
    t = Clock::now();
    veq::fit::FitInputs fi;
    fi.sample_volume_mL = run.facts.sample_volume_mL.value_or(0.0);
    fi.titrant_conc_mol_L = run.facts.titrant_conc_mol_L.value_or(0.0);
    fi.titrant = run.facts.titrant_kind;
    fi.temperature_C = a.curve.temperature_C;
    veq::fit::FitResult fr = veq::fit::fit_titration(a.curve, fi, a.endpoints.endpoints, a.gran, {});
    double fit_s = seconds_since(t);
    // --fit-repeat R: the fit R times, its shortest time counted (a shared machine's interruptions left out).
    for (int r = 1; r < fit_repeat; ++r) {
      t = Clock::now();
      fr = veq::fit::fit_titration(a.curve, fi, a.endpoints.endpoints, a.gran, {});
      fit_s = std::min(fit_s, seconds_since(t));
    }
    s.fit += fit_s;
    std::string kind = f.stem().string();
    kind = kind.substr(std::min(kind.size(), kind.find('_', 4) + 1));
    s.fit_by_kind[kind].first += fit_s;
    ++s.fit_by_kind[kind].second;
    // The whole of veq::analyze() (the stages above again, the fit, the final consensus and the
    // indicators): what is left after the stages is the consensus with the fit and the indicators.
    t = Clock::now();
    a = veq::analyze(run);
    s.rest += seconds_since(t);
    t = Clock::now();
    const std::string json = veq::report::to_json(a);
    s.json += seconds_since(t);
    t = Clock::now();
    const std::string html = veq::report::to_html(a);
    s.html += seconds_since(t);
    ++s.runs;
  }
  return s;
}

}  // namespace

int main(int argc, char** argv) {
  std::size_t n = 10000;
  fs::path dir = fs::temp_directory_path() / "veq_bench_batch";
  bool keep = false;
  bool stages_only = false;  // the per-stage timing alone (no runs of the binary)
  int repeat = 3;
  int fit_repeat = 1;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    if (a == "--runs" && i + 1 < argc) {
      n = std::stoul(argv[++i]);
    } else if (a == "--dir" && i + 1 < argc) {
      dir = argv[++i];
    } else if (a == "--repeat" && i + 1 < argc) {
      repeat = std::max(1, std::stoi(argv[++i]));
    } else if (a == "--fit-repeat" && i + 1 < argc) {
      fit_repeat = std::max(1, std::stoi(argv[++i]));
    } else if (a == "--keep") {
      keep = true;
    } else if (a == "--stages-only") {
      stages_only = true;
    } else {
      std::cerr
          << "usage: veq_bench_batch [--runs N] [--repeat R] [--fit-repeat F] [--dir DIR] [--keep] [--stages-only]\n";
      return 2;
    }
  }
  const fs::path in = dir / "in", small = dir / "in_tenth";
  const fs::path outputs = dir / fmt::format("outputs-{}", ::getpid());
  generate(in, n);
  generate(small, n / 10);
  std::vector<fs::path> files;
  for (const auto& e : fs::directory_iterator(in)) {
    if (e.path().extension() == ".csv") files.push_back(e.path());
  }
  std::sort(files.begin(), files.end());

  std::cout << fmt::format("veq {} batch benchmark: {} simulated runs (seed {}), {} hardware threads, load {}\n",
                           veq::version(),
                           files.size(),
                           kSeed,
                           std::thread::hardware_concurrency(),
                           load_average());
  const Stages s = time_stages(files, fit_repeat);
  // veq::analyze() repeats prepare to the fit; what it adds beyond them is the final consensus and the indicators.
  const double rest = std::max(0.0, s.rest - (s.prepare + s.endpoints + s.gran + s.fit));
  const double analysis = s.ingest + s.prepare + s.endpoints + s.gran + s.fit + rest;
  auto us = [&](double total) { return 1e6 * total / static_cast<double>(std::max<std::size_t>(s.runs, 1)); };
  std::cout << fmt::format(
      "\nTime per stage, one thread, mean per run ({} runs, {:.0f} readings on average, {} failed):\n",
      s.runs,
      static_cast<double>(s.points) / std::max<std::size_t>(s.runs, 1),
      s.failed);
  for (const auto& [name, t] : std::vector<std::pair<std::string, double>>{{"read + hash", s.read},
                                                                           {"ingest", s.ingest},
                                                                           {"prepare", s.prepare},
                                                                           {"derivative endpoints", s.endpoints},
                                                                           {"Gran + consensus", s.gran},
                                                                           {"charge-balance fit", s.fit},
                                                                           {"indicators, final", rest},
                                                                           {"JSON", s.json},
                                                                           {"HTML report", s.html}}) {
    std::cout << fmt::format("  {:<22}{:9.1f} us  {:5.1f} % of the analysis\n", name, us(t), 100.0 * t / analysis);
  }
  std::cout << fmt::format(
      "  {:<22}{:9.1f} us  -> {:.0f} runs/s on one thread (ingest to indicators, the fit included)\n",
      "analysis",
      us(analysis),
      static_cast<double>(s.runs) / analysis);
  std::cout << "  fit by kind of run:";
  for (const auto& [kind, v] : s.fit_by_kind)
    std::cout << fmt::format(
        " {} {:.0f} us;", kind, 1e6 * v.first / static_cast<double>(std::max<std::size_t>(v.second, 1)));
  std::cout << "\n";
  if (stages_only) return 0;

  std::cout << "\nveq batch (the real binary), fresh output folder each time:\n";
  std::cout << fmt::format(
      "  {:<38}{:>9}{:>9}{:>9}{:>15}{:>10}\n", "", "wall [s]", "runs/s", "CPU [s]", "CPU per run", "peak RSS");
  double rate1 = 0, rate2 = 0;
  auto line = [&](const std::string& what, const Child& c, std::size_t runs) {
    const double rate = static_cast<double>(runs) / c.wall_s;
    std::cout << fmt::format("  {:<38}{:9.2f}{:9.0f}{:9.2f}{:12.0f} us{:7.1f} MB  load {}{}\n",
                             what,
                             c.wall_s,
                             rate,
                             c.cpu_s,
                             1e6 * c.cpu_s / static_cast<double>(runs),
                             static_cast<double>(c.peak_rss_kB) / 1024.0,
                             load_average(),
                             c.code <= 1 ? "" : "  (exit code " + std::to_string(c.code) + ")");
    return rate;
  };
  // JSON + summaries, alternating 1 and 2 workers `repeat` times: the machine is shared, so the
  // best and the median of each are shown.
  std::vector<double> best(3, 0.0);
  for (int r = 0; r < repeat; ++r) {
    for (const unsigned jobs : {1u, 2u}) {
      const fs::path out = outputs / fmt::format("nohtml_{}_{}", jobs, r);
      const Child c =
          run_veq({"batch", in.string(), "--out", out.string(), "--jobs", std::to_string(jobs), "--no-html"});
      const double rate = line(fmt::format("{} worker(s), JSON + summaries", jobs), c, files.size());
      best[jobs] = std::max(best[jobs], rate);
    }
  }
  rate1 = best[1];
  rate2 = best[2];
  for (const unsigned jobs : {1u, 2u}) {
    const fs::path out = outputs / fmt::format("html_{}", jobs);
    const Child c = run_veq({"batch", in.string(), "--out", out.string(), "--jobs", std::to_string(jobs)});
    line(fmt::format("{} worker(s), with HTML reports", jobs), c, files.size());
  }
  {
    const Child c = run_veq({"batch", in.string(), "--out", (outputs / "html_2").string(), "--jobs", "2"});
    line("2 workers, resumed (nothing to redo)", c, files.size());
  }
  {
    const fs::path out = outputs / "tenth";
    const Child c = run_veq({"batch", small.string(), "--out", out.string(), "--jobs", "2", "--no-html"});
    line(fmt::format("2 workers, {} runs (a tenth)", n / 10), c, n / 10);
  }
  std::cout << fmt::format(
      "\nBest of {}: {:.0f} runs/s with 1 worker, {:.0f} with 2 (JSON + summaries); scaling {:.2f}x\n",
      repeat,
      rate1,
      rate2,
      rate2 / rate1);
  std::cout << fmt::format(
      "Command: scripts/bench batch --runs {} --repeat {}   (simulated runs kept in {})\n", n, repeat, in.string());
  if (keep) {
    std::cout << "Outputs kept in " << outputs.string() << "\n";
  } else {
    fs::remove_all(outputs);
  }
  return 0;
}
