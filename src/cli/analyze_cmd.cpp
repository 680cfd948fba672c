// SPDX-License-Identifier: MIT
// `veq analyze RUN`: one run, readable summary and optional JSON.
#include <filesystem>
#include <iostream>
#include <memory>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "cli/run_options.hpp"
#include "veq/analyze.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/core/constants.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace veq::cli {

void add_analyze(CLI::App& app, Action& action) {
  struct State {
    std::string run;
    std::string json;
    std::string html;
    bool force = false;
    bool quiet = false;
    RunOptions opt;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd = app.add_subcommand("analyze", "Find the endpoints of one run and print a summary");
  cmd->add_option("RUN", st->run, "The exported log (pH or mV against volume)")->required();
  cmd->add_option("--json", st->json, "Also write the result as JSON to FILE, or '-' for standard output");
  cmd->add_option("--html", st->html, "Also write the readable report (HTML with plots) to FILE");
  cmd->add_flag("--force", st->force, "Replace an existing output file");
  cmd->add_flag("-q,--quiet", st->quiet, "No summary on standard output");
  add_run_options(cmd, st->opt);
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      (void)err;
      Run run = ingest::read_run(st->run, ingest_options(st->opt));
      apply_facts(st->opt, run);
      const double t = run.facts.temperature_C.value_or(constants::kStandardTemperatureC);
      const Analysis a = analyze(std::move(run), analyze_options(st->opt, t));
      const bool json_stdout = st->json == "-";
      if (!st->quiet && !json_stdout) out << report::to_text(a);
      if (!st->json.empty()) {
        const std::string json = report::to_json(a);
        if (json_stdout) out << json;
        else io::write_file_atomically(st->json, json, st->force);
      }
      if (!st->html.empty()) io::write_file_atomically(st->html, report::to_html(a), st->force);
      return a.endpoints.endpoints.empty() ? kExitFailed : kExitOk;
    };
  });
}

}  // namespace veq::cli
