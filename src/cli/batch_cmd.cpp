// SPDX-License-Identifier: MIT
// `veq batch DIR --out OUTDIR`: every run of a folder, with progress, clean stop on SIGINT/SIGTERM, exit codes.
#include <fmt/format.h>
#include <unistd.h>

#include <atomic>
#include <csignal>
#include <cstring>
#include <fstream>
#include <iostream>
#include <memory>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "cli/run_options.hpp"
#include "veq/batch/batch.hpp"
#include "veq/core/constants.hpp"

namespace veq::cli {
namespace {

// Set by the signal handler, read by the workers; a lock-free atomic is safe in both.
std::atomic<int> g_stop_signal{0};
static_assert(std::atomic<int>::is_always_lock_free);

extern "C" void on_stop_signal(int sig) {
  g_stop_signal.store(sig);
  static constexpr char kMessage[] =
      "\nveq: stopping: finishing the runs in flight, then writing the summaries (again to abort at once)\n";
  const ssize_t n = ::write(STDERR_FILENO, kMessage, sizeof kMessage - 1);
  (void)n;
}

// Installs the handlers for the lifetime of one batch; SA_RESETHAND makes a
// second signal take its default action (safe: every output is atomic).
class StopSignals {
 public:
  StopSignals() {
    g_stop_signal.store(0);
    struct sigaction sa {};
    sa.sa_handler = on_stop_signal;
    sigemptyset(&sa.sa_mask);
    sa.sa_flags = SA_RESETHAND;
    sigaction(SIGINT, &sa, &m_old_int);
    sigaction(SIGTERM, &sa, &m_old_term);
  }
  StopSignals(const StopSignals&) = delete;
  StopSignals& operator=(const StopSignals&) = delete;
  ~StopSignals() {
    sigaction(SIGINT, &m_old_int, nullptr);
    sigaction(SIGTERM, &m_old_term, nullptr);
  }

 private:
  struct sigaction m_old_int {};
  struct sigaction m_old_term {};
};

std::string clock_text(double s) {
  if (!(s >= 0) || s > 359999) return "--:--";
  const long t = static_cast<long>(s + 0.5);
  return t >= 3600 ? fmt::format("{}:{:02d}:{:02d}", t / 3600, (t / 60) % 60, t % 60)
                   : fmt::format("{}:{:02d}", t / 60, t % 60);
}

}  // namespace

void add_batch(CLI::App& app, Action& action) {
  struct State {
    std::string dir;
    std::string out;
    unsigned jobs = 0;
    bool recursive = false;
    std::vector<std::string> patterns;
    std::string shard;
    bool force = false;
    bool no_html = false;
    RunOptions opt;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd = app.add_subcommand("batch", "Analyse every run in a folder: reports, summary table, index page");
  cmd->add_option("DIR", st->dir, "The folder holding the exported runs")->required();
  cmd->add_option("--out", st->out, "Output folder (created if needed); rerunning into it resumes")->required();
  cmd->add_option("--jobs", st->jobs, "Runs processed at once (default: the hardware threads)")
      ->check(CLI::Range(1u, 1024u));
  cmd->add_flag("--recursive", st->recursive, "Also take runs from subfolders");
  cmd->add_option("--pattern",
                  st->patterns,
                  "Which files are runs (glob, case-insensitive; repeatable; default *.csv *.txt *.tsv)");
  cmd->add_option("--shard", st->shard, "Take only part I of N of the folder, e.g. 2/4 (split by a hash of the path)");
  cmd->add_flag("--force", st->force, "Redo every run, even unchanged ones");
  cmd->add_flag("--no-html", st->no_html, "Write no per-run HTML report (JSON and summaries only)");
  add_run_options(cmd, st->opt);
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      batch::BatchOptions bo;
      bo.input_dir = st->dir;
      bo.output_dir = st->out;
      bo.jobs = st->jobs;
      bo.force = st->force;
      bo.html_reports = !st->no_html;
      bo.list.recursive = st->recursive;
      if (!st->patterns.empty()) bo.list.patterns = st->patterns;
      if (!st->shard.empty()) bo.list.shard = batch::parse_shard(st->shard);
      bo.ingest = ingest_options(st->opt);
      bo.settings_identity = fingerprint(st->opt);
      // The method (--method, from the shared run options) is applied to every run; its
      // content hash is part of what decides a redo.
      const std::optional<method::Method> method = load_method_option(st->opt);
      if (method) {
        bo.method_identity = "xxh3:" + method->identity;
        if (method->group_by == "pattern") bo.replicate_pattern = method->group_pattern;
        bo.max_rsd_percent = method->max_rsd_percent;
      }
      // Fail on bad options now rather than once per run.
      (void)analyze_options(st->opt, st->opt.temperature_C.value_or(constants::kStandardTemperatureC));
      const RunOptions opt = st->opt;
      bo.configure = [opt, method](Run& run) {
        apply_facts(opt, run);
        AnalyzeOptions ao = analyze_options(opt, run.facts.temperature_C.value_or(constants::kStandardTemperatureC));
        ao.method = method;
        return ao;
      };

      const bool tty = ::isatty(STDERR_FILENO) == 1;
      batch::BatchHooks hooks;
      hooks.stop_requested = [] { return g_stop_signal.load() != 0; };
      bool progress_shown = false;
      if (tty) {
        hooks.progress = [&err, &progress_shown](const batch::Progress& p) {
          const double rate = p.elapsed_s > 0 ? static_cast<double>(p.done) / p.elapsed_s : 0.0;
          const double left = rate > 0 ? static_cast<double>(p.total - p.done) / rate : -1.0;
          err << fmt::format(
                     "\rveq batch: {}/{} runs  {:.0f} runs/s  {} left   ", p.done, p.total, rate, clock_text(left))
              << std::flush;
          progress_shown = true;
        };
      }
      batch::BatchSummary s;
      {
        const StopSignals signals;
        s = batch::run_batch(bo, hooks);
      }
      if (progress_shown) err << "\n";

      const std::size_t good = s.count(batch::RunStatus::ok) + s.count(batch::RunStatus::flagged);
      out << fmt::format("veq batch: {} run{} in {}: {} analysed ({} flagged), {} failed\n",
                         s.listed,
                         s.listed == 1 ? "" : "s",
                         st->dir,
                         good,
                         s.count(batch::RunStatus::flagged),
                         s.failed());
      out << fmt::format("  processed {}, kept unchanged {}, in {:.2f} s\n", s.processed, s.resumed, s.elapsed_s);
      if (s.replaced > 0) {
        out << fmt::format(
            "  {} earlier result(s) replaced: their file, method, options or veq version changed, or their "
            "result files were damaged or missing{}\n",
            s.replaced,
            st->force ? " (or --force)" : "");
      }
      if (s.failed() > 0) out << "  failures and reasons: " << (bo.output_dir / batch::kErrorsTxt).string() << "\n";
      out << "  index: " << s.index_html.string() << "\n";
      if (s.stopped) {
        err << fmt::format("veq: stopped early: {} run(s) not processed; run the same command again to resume\n",
                           s.count(batch::RunStatus::not_run));
      }
      if (s.count(batch::RunStatus::internal_error) > 0) {
        err << "veq: internal error in " << s.count(batch::RunStatus::internal_error)
            << " run(s) (a bug in veq; see errors.txt and please report it with the file)\n";
        return kExitInternal;
      }
      if (s.replicate_failures > 0) {
        out << fmt::format("  {} replicate group(s) above the method's RSD limit (errors.txt, replicates.csv)\n",
                           s.replicate_failures);
      }
      return s.failed() > 0 || s.stopped || s.replicate_failures > 0 ? kExitFailed : kExitOk;
    };
  });
}

}  // namespace veq::cli
