// SPDX-License-Identifier: MIT
// `veq crosscheck RUN --indicator NAME --manual-volume V`: does a manual colour titration agree with the run?
#include <iostream>
#include <memory>
#include <optional>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "cli/run_options.hpp"
#include "veq/analyze.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/core/constants.hpp"
#include "veq/fit/fit.hpp"
#include "veq/indicators/crosscheck.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/indicators.hpp"

namespace veq::cli {

void add_crosscheck(CLI::App& app, Action& action) {
  struct State {
    std::string run;
    std::string indicator;
    double manual_volume_mL = 0.0;
    std::optional<double> manual_sample_volume_mL;
    double burette_tolerance_mL = indicators::kClassA50mLBuretteTolerance_mL;
    std::string json;
    bool force = false;
    bool quiet = false;
    RunOptions opt;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd = app.add_subcommand(
      "crosscheck", "Compare a manual colour-indicator titration with a pH-meter run of the same sample");
  cmd->add_option("RUN", st->run, "The exported log of the pH-meter run")->required();
  cmd->add_option("--indicator", st->indicator, "Indicator used for the manual titration ('veq indicators' lists them)")
      ->required();
  cmd->add_option("--manual-volume", st->manual_volume_mL, "Titrant volume of the manual titration [mL]")
      ->required()
      ->check(CLI::PositiveNumber);
  cmd->add_option("--manual-sample-volume",
                  st->manual_sample_volume_mL,
                  "Sample volume of the manual titration [mL] (default: the run's); needs the run's sample volume")
      ->check(CLI::PositiveNumber);
  cmd->add_option("--burette-tolerance",
                  st->burette_tolerance_mL,
                  "Burette tolerance [mL] (default 0.05: Class A 50 mL, ISO 385 / ASTM E287)")
      ->check(CLI::Range(0.0, 5.0));
  cmd->add_option(
      "--json", st->json, "Also write the run and the cross-check as JSON to FILE, or '-' for standard output");
  cmd->add_flag("--force", st->force, "Replace an existing output file");
  cmd->add_flag("-q,--quiet", st->quiet, "No summary on standard output");
  add_run_options(cmd, st->opt);
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      (void)err;
      Run run = ingest::read_run(st->run, ingest_options(st->opt));
      apply_facts(st->opt, run);
      const double t = run.facts.temperature_C.value_or(constants::kStandardTemperatureC);
      const AnalyzeOptions ao = analyze_options(st->opt, t);
      const Analysis a = analyze(std::move(run), ao);
      indicators::ManualTitration manual;
      manual.indicator = st->indicator;
      manual.volume_mL = st->manual_volume_mL;
      manual.sample_volume_mL = st->manual_sample_volume_mL;
      indicators::CrosscheckOptions co;
      co.burette_tolerance_mL = st->burette_tolerance_mL;
      co.indicator = ao.indicators;
      // The same curve `veq analyze` judges indicators on: the fitted model when the fit passed its checks.
      std::optional<indicators::PhCurve> model;
      if (a.fit.usable()) model = fit::fitted_curve(*a.fit.best, a.curve);
      const auto r = indicators::crosscheck(
          a.run, a.curve, a.endpoints, manual, co, indicators::IndicatorTable::builtin(), model ? &*model : nullptr);
      const bool json_stdout = st->json == "-";
      if (!st->quiet && !json_stdout) out << report::crosscheck_text(r);
      if (!st->json.empty()) {
        const std::string json = report::to_json(a, r);
        if (json_stdout)
          out << json;
        else
          io::write_file_atomically(st->json, json, st->force);
      }
      return r.agrees ? kExitOk : kExitFailed;
    };
  });
}

}  // namespace veq::cli
