// SPDX-License-Identifier: MIT
// `veq analyze RUN...`: each run's summary, optional JSON, results with a method, replicate statistics.
#include <fmt/format.h>

#include <filesystem>
#include <iostream>
#include <map>
#include <memory>
#include <nlohmann/json.hpp>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "cli/run_options.hpp"
#include "veq/analyze.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/core/constants.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/method/replicates.hpp"
#include "veq/method/titer.hpp"
#include "veq/report/html.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace veq::cli {
namespace {

struct Replicate {
  std::string run;
  double value;
};

// Replicate statistics of every result, per group (sample id or file-name pattern).
std::string replicates_text(const std::vector<Analysis>& runs,
                            const method::Method* m,
                            nlohmann::ordered_json* out_json,
                            bool* replicates_failed) {
  // group -> result name -> values
  std::map<std::string, std::map<std::string, std::vector<Replicate>>> groups;
  std::map<std::string, std::string> units;
  for (const auto& a : runs) {
    if (!a.results) continue;
    const std::string stem = std::filesystem::path(a.run.source).stem().string();
    const std::string group =
        method::replicate_group(a.run.facts.sample_id, stem, m && m->group_by == "pattern" ? m->group_pattern : "");
    for (const auto& r : a.results->results) {
      groups[group][r.name].push_back({a.run.source, r.value});
      units[r.name] = std::string(method::to_string(r.unit));
    }
  }
  std::string text;
  nlohmann::ordered_json arr = nlohmann::ordered_json::array();
  for (const auto& [group, results] : groups) {
    for (const auto& [name, reps] : results) {
      if (reps.size() < 2) continue;
      std::vector<double> values;
      for (const auto& r : reps) values.push_back(r.value);
      const method::ReplicateStats s = method::replicate_stats(values);
      text += fmt::format(
          "  Replicates of {} ({}): n = {}, mean {:.6g} {}, SD {:.3g}, RSD {:.2f} %, 95 % CI [{:.6g}, {:.6g}]",
          group,
          name,
          s.n,
          s.mean,
          units[name],
          s.sd,
          s.rsd_percent,
          s.ci95_low,
          s.ci95_high);
      if (s.n >= 3) text += fmt::format(", Grubbs G {:.3f} (critical {:.3f})", s.grubbs_G, s.grubbs_critical);
      text += "\n";
      if (s.outlier) text += "    suspect outlier (flagged, kept): " + reps[*s.outlier].run + "\n";
      const bool rsd_failed = m && m->max_rsd_percent && s.rsd_percent > *m->max_rsd_percent;
      if (rsd_failed && replicates_failed) *replicates_failed = true;
      if (rsd_failed)
        text += fmt::format(
            "    Acceptance failed: RSD {:.2f} % above the method's {:g} %\n", s.rsd_percent, *m->max_rsd_percent);
      nlohmann::ordered_json j;
      j["group"] = group;
      j["result"] = name;
      j["unit"] = units[name];
      j["n"] = s.n;
      j["mean"] = s.mean;
      j["sd"] = s.sd;
      j["rsd_percent"] = s.rsd_percent;
      j["ci95"] = {s.ci95_low, s.ci95_high};
      j["grubbs_G"] = s.grubbs_G;
      j["grubbs_critical"] = s.grubbs_critical;
      j["outlier"] = s.outlier ? nlohmann::ordered_json(reps[*s.outlier].run) : nlohmann::ordered_json(nullptr);
      j["rsd_acceptance"] = m && m->max_rsd_percent ? nlohmann::ordered_json(rsd_failed ? "failed" : "passed")
                                                    : nlohmann::ordered_json(nullptr);
      nlohmann::ordered_json members = nlohmann::ordered_json::array();
      for (const auto& r : reps) members.push_back({{"run", r.run}, {"value", r.value}});
      j["members"] = members;
      arr.push_back(j);
    }
  }
  if (out_json) *out_json = arr;
  return text;
}

}  // namespace

void add_analyze(CLI::App& app, Action& action) {
  struct State {
    std::vector<std::string> runs;
    std::string json;
    std::string titer_out;
    std::string html;
    bool force = false;
    bool quiet = false;
    RunOptions opt;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd =
      app.add_subcommand("analyze", "Find the endpoints of one or more runs, print a summary, compute results");
  cmd->alias("analyse");  // the British spelling works too
  cmd->add_option("RUN", st->runs, "Exported logs (pH or mV against volume); several runs of a sample are replicates")
      ->required();
  cmd->add_option("--json", st->json, "Also write the result as JSON to FILE, or '-' for standard output");
  cmd->add_option(
      "--titer-out", st->titer_out, "With a standardisation method: write the titrant's concentration to FILE");
  cmd->add_option("--html", st->html, "Also write the readable report (HTML with plots) to FILE");
  cmd->add_flag("--force", st->force, "Replace an existing output file");
  cmd->add_flag("-q,--quiet", st->quiet, "No summary on standard output");
  add_run_options(cmd, st->opt);
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      const std::optional<method::Method> m = load_method_option(st->opt);
      std::vector<Analysis> done;
      bool bad_input = false, failed = false;
      const bool single = st->runs.size() == 1;
      const bool json_stdout = st->json == "-";
      for (const auto& file : st->runs) {
        try {
          Run run = ingest::read_run(file, ingest_options(st->opt));
          apply_facts(st->opt, run);
          const double t = run.facts.temperature_C.value_or(constants::kStandardTemperatureC);
          AnalyzeOptions ao = analyze_options(st->opt, t);
          ao.method = m;
          Analysis a = analyze(std::move(run), ao);
          if (!st->quiet && !json_stdout) out << report::to_text(a) << (single ? "" : "\n");
          bool out_of_spec = false;
          if (a.results) {
            for (const auto& r : a.results->results) out_of_spec = out_of_spec || r.verdict == "fail";
          }
          failed = failed || a.endpoints.endpoints.empty() || !a.results_error.empty() || out_of_spec ||
                   (a.results && !a.results->acceptance_failures.empty());
          done.push_back(std::move(a));
        } catch (const InputError& e) {
          if (single) throw;
          // One bad file does not stop the others.
          err << "veq: error: " << e.what() << "\n";
          if (!e.hint().empty()) err << "  hint: " << e.hint() << "\n";
          bad_input = true;
        }
      }
      nlohmann::ordered_json replicates;
      bool rep_failed = false;
      const std::string rep_text =
          done.size() > 1 ? replicates_text(done, m ? &*m : nullptr, &replicates, &rep_failed) : "";
      failed = failed || rep_failed;
      if (!st->quiet && !json_stdout && !rep_text.empty()) out << rep_text;
      if (!st->json.empty()) {
        std::string json;
        if (single) {
          json = report::to_json(done.front());
        } else {
          nlohmann::ordered_json all;
          all["schema"] = "veq.runs/1";
          all["veq_version"] = version();
          nlohmann::ordered_json runs = nlohmann::ordered_json::array();
          for (const auto& a : done) runs.push_back(nlohmann::ordered_json::parse(report::to_json(a)));
          all["runs"] = runs;
          all["replicates"] = replicates.is_null() ? nlohmann::ordered_json::array() : replicates;
          json = all.dump(2) + "\n";
        }
        if (json_stdout)
          out << json;
        else
          io::write_file_atomically(st->json, json, st->force);
      }
      if (!st->titer_out.empty()) {
        std::vector<const method::TiterRecord*> titers;
        for (const auto& a : done) {
          if (a.results && a.results->titer) titers.push_back(&*a.results->titer);
        }
        if (titers.empty()) {
          throw InputError({"--titer-out", 0, 0},
                           "no titrant concentration to write",
                           "use a standardisation method (result unit \"mol/L titrant\") on a run that gives a result");
        }
        method::TiterRecord rec = *titers.front();
        if (titers.size() > 1) {
          // Mean of the replicates; u = sqrt(mean(u_i)^2 + s^2 / n): the individual
          // uncertainties share their systematic parts (standard, balance, burette),
          // the scatter adds the random part of the mean.
          std::vector<double> c;
          double u_sum = 0;
          for (const auto* t : titers) c.push_back(t->concentration_mol_L), u_sum += t->uncertainty_mol_L;
          const method::ReplicateStats s = method::replicate_stats(c);
          const double u_mean = u_sum / static_cast<double>(titers.size());
          rec.concentration_mol_L = s.mean;
          rec.uncertainty_mol_L = std::sqrt(u_mean * u_mean + s.sd * s.sd / static_cast<double>(s.n));
          rec.source_run = fmt::format("mean of {} runs", titers.size());
        }
        io::write_file_atomically(st->titer_out, method::titer_to_toml(rec), st->force);
        if (!st->quiet && !json_stdout) out << "  Titer written to " << st->titer_out << "\n";
      }
      if (!st->html.empty()) {
        if (!single)
          throw InputError({"--html", 0, 0}, "--html writes the report of one run", "give one RUN, or use veq batch");
        if (!done.empty()) io::write_file_atomically(st->html, report::to_html(done.front()), st->force);
      }
      if (bad_input) return kExitUsage;
      return failed ? kExitFailed : kExitOk;
    };
  });
}

}  // namespace veq::cli
