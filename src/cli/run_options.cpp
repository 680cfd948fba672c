// SPDX-License-Identifier: MIT
// Shared run options: parsing and application.
#include "cli/run_options.hpp"

#include <fmt/format.h>

#include <cmath>
#include <cstdio>
#include <cstdlib>
#include <string>

#include "veq/core/constants.hpp"
#include "veq/core/error.hpp"
#include "veq/signal/prepare.hpp"

namespace veq::cli {

namespace {

// "a positive number", said plainly: CLI11's PositiveNumber prints its range with the largest double.
const CLI::Validator kPositive(
    [](std::string& text) -> std::string {
      char* end = nullptr;
      const double v = std::strtod(text.c_str(), &end);
      if (text.empty() || end == text.c_str() || *end != '\0') return "'" + text + "' is not a number";
      if (!std::isfinite(v) || !(v > 0.0)) return "'" + text + "' must be a positive number";
      return {};
    },
    "POSITIVE",
    "positive number");

}  // namespace

void add_run_options(CLI::App* cmd, RunOptions& o) {
  cmd->add_option("--method", o.method_file, "Method file (TOML): turns endpoints into reportable results")
      ->group("Results");
  const char* facts = "Run facts (win over the file's metadata)";
  cmd->add_option("--sample-volume", o.sample_volume_mL, "Sample volume V0 [mL]")->group(facts)->check(kPositive);
  cmd->add_option("--titrant-conc", o.titrant_conc_mol_L, "Titrant concentration Ct [mol/L]")
      ->group(facts)
      ->check(kPositive);
  cmd->add_option("--titrant", o.titrant, "Titrant kind: base (pH rises) or acid (pH falls)")
      ->group(facts)
      ->check(CLI::IsMember({"acid", "base"}));
  cmd->add_option("--temperature", o.temperature_C, "Temperature of the run [°C]")
      ->group(facts)
      ->check(CLI::Range(-5.0, 100.0));
  const char* reading = "Reading the file";
  cmd->add_option("--columns", o.columns, "Column positions, 1-based: volume=N,signal=M[,temperature=K][,time=J]")
      ->group(reading);
  cmd->add_option("--volume-unit", o.volume_unit, "Unit of the volume column: mL, uL or L")->group(reading);
  cmd->add_option("--signal", o.signal, "What the signal column holds when the header does not say: pH or mV")
      ->group(reading)
      ->check(CLI::IsMember({"pH", "mV", "ph", "mv"}));
  cmd->add_flag("--sort", o.sort, "Accept rows out of volume order and sort them")->group(reading);
  cmd->add_option("--max-size", o.max_size_MiB, "Refuse files larger than this [MiB] (default 64)")
      ->group(reading)
      ->check(kPositive);
  const char* electrode = "Electrode (mV runs)";
  cmd->add_option("--e0", o.e0_mV, "Electrode potential at pH 0 [mV]; converts mV to pH")->group(electrode);
  cmd->add_option("--slope", o.slope_mV, "Electrode slope [mV/pH] (default: Nernst slope at the run temperature)")
      ->group(electrode);
  cmd->add_option("--buffers", o.buffers, "Two buffer readings 'pH1:E1,pH2:E2' [pH:mV]; converts mV to pH")
      ->group(electrode);
  const char* endpoints = "Endpoint detection";
  cmd->add_option("--window", o.window, "Readings per derivative window, even (default 0: chosen from the data)")
      ->group(endpoints);
  cmd->add_option("--min-height", o.min_height, "Smallest endpoint peak as a fraction of the highest (default 0.05)")
      ->group(endpoints);
  cmd->add_option(
         "--min-separation", o.min_separation_mL, "Smallest distance between endpoints [mL] (default: 3 dosing steps)")
      ->group(endpoints);
  cmd->add_option("--analyte-charge",
                  o.analyte_charge,
                  "Charge of the analyte titrated (0: HA or B, -1: hydrogen phthalate, -2: carbonate); "
                  "lets Gran correct for activity")
      ->group(endpoints)
      ->check(CLI::Range(-4, 4));
  cmd->add_option("--gran-window",
                  o.gran_window,
                  "Fit the Gran line only to readings in FROM:TO mL (default: chosen by the linearity rule)")
      ->group(endpoints);
  cmd->add_option("--drop-volume", o.drop_volume_mL, "Volume of one drop from the burette [mL] (default 0.05)")
      ->group("Indicators")
      ->check(CLI::Range(0.001, 1.0));
  const char* fit = "Charge-balance fit (needs the sample volume and titrant concentration)";
  cmd->add_flag("--no-fit", o.no_fit, "Do not fit the curve")->group(fit);
  cmd->add_option("--model",
                  o.model,
                  "Fit this model only: strong_acid, weak_acid, diprotic_acid, triprotic_acid, strong_weak_acid, "
                  "acid_salt, strong_base, weak_base, carbonate_base, strong_weak_base, hydroxide_carbonate, "
                  "carbonate_bicarbonate, "
                  "or a substance of the analyte table (e.g. KHP) (default: chosen by BIC)")
      ->group(fit);
  cmd->add_flag("--fit-titer",
                o.fit_titer,
                "Fit the titrant factor (needs a standardisation method giving the standard's mass and molar mass)")
      ->group(fit);
  cmd->add_flag("--fit-carbonate", o.fit_carbonate, "Fit the carbonate fraction of a base titrant")->group(fit);
  cmd->add_flag("--fix-electrode",
                o.fix_electrode,
                "Hold the electrode: offset 0 (pH), or Nernst slope and the best starting E0 (mV)")
      ->group(fit);
  cmd->add_option("--fit-hold", o.fit_hold, "Hold a parameter at a value, NAME=VALUE (e.g. pKa1=2.95); repeatable")
      ->group(fit);
  cmd->add_option("--fit-loss", o.fit_loss, "Robust loss: huber (default), cauchy or none")
      ->group(fit)
      ->check(CLI::IsMember({"huber", "cauchy", "none"}));
  cmd->add_option("--fit-loss-scale", o.fit_loss_scale, "Loss threshold in reading-noise SDs (default 3)")
      ->group(fit)
      ->check(CLI::Range(0.1, 100.0));
  cmd->add_option("--fit-criterion", o.fit_criterion, "Model selection criterion: bic (default) or aicc")
      ->group(fit)
      ->check(CLI::IsMember({"aicc", "bic"}));
  cmd->add_flag("--fit-ideal", o.fit_ideal, "Fit with activity coefficients 1 (default: Davies)")->group(fit);
  cmd->add_option(
         "--ionic-strength", o.ionic_strength_mol_L, "Background electrolyte of the sample, as ionic strength [mol/L]")
      ->group(fit)
      ->check(CLI::Range(0.0, 5.0));
}

ingest::IngestOptions ingest_options(const RunOptions& o) {
  ingest::IngestOptions io;
  if (!o.columns.empty()) io.columns = ingest::parse_column_overrides(o.columns);
  if (!o.volume_unit.empty()) io.volume_unit = o.volume_unit;
  if (!o.signal.empty()) io.signal = (o.signal == "mV" || o.signal == "mv") ? SignalKind::mv : SignalKind::ph;
  io.sort_by_volume = o.sort;
  io.max_file_bytes = static_cast<std::uint64_t>(o.max_size_MiB * 1048576.0);
  if (const auto p = io.validate(); !p.empty()) throw InputError({"options", 0, 0}, p.front());
  return io;
}

AnalyzeOptions analyze_options(const RunOptions& o, double temperature_C) {
  AnalyzeOptions ao;
  if (!o.buffers.empty()) {
    double p1 = 0, e1 = 0, p2 = 0, e2 = 0;
    char c1 = 0, c2 = 0, c3 = 0;
    std::string rest;
    if (std::sscanf(o.buffers.c_str(), "%lf%c%lf%c%lf%c%lf", &p1, &c1, &e1, &c2, &p2, &c3, &e2) != 7 || c1 != ':' ||
        c2 != ',' || c3 != ':') {
      throw InputError({"--buffers", 0, 0},
                       "'" + o.buffers + "' is not of the form pH1:E1,pH2:E2",
                       "e.g. --buffers 4.01:171.5,7.00:-2.3");
    }
    ao.prepare.electrode = signal::calibration_from_buffers(p1, e1, p2, e2, temperature_C);
  } else if (o.e0_mV) {
    ElectrodeCalibration cal;
    cal.e0_mV = *o.e0_mV;
    cal.temperature_C = temperature_C;
    cal.slope_mV_per_pH = o.slope_mV.value_or(nernst_slope_mV(temperature_C));
    cal.source = "options";
    ao.prepare.electrode = cal;
  } else if (o.slope_mV) {
    throw InputError({"--slope", 0, 0}, "--slope needs --e0 as well", "give both, or use --buffers");
  }
  ao.endpoints.window_points = o.window;
  if (o.min_height) ao.endpoints.min_relative_height = *o.min_height;
  if (o.min_separation_mL) ao.endpoints.min_separation_mL = *o.min_separation_mL;
  if (o.analyte_charge) ao.gran.analyte_charge = o.analyte_charge;
  if (!o.gran_window.empty()) {
    double from = 0, to = 0;
    char colon = 0, extra = 0;
    if (std::sscanf(o.gran_window.c_str(), "%lf%c%lf%c", &from, &colon, &to, &extra) != 3 || colon != ':' ||
        !(to > from)) {
      throw InputError({"--gran-window", 0, 0},
                       "'" + o.gran_window + "' is not of the form FROM:TO (mL, FROM < TO)",
                       "e.g. --gran-window 5.0:9.5");
    }
    ao.gran.window_mL = std::make_pair(from, to);
  }
  if (o.drop_volume_mL) ao.indicators.drop_volume_mL = *o.drop_volume_mL;
  ao.fit.enabled = !o.no_fit;
  ao.fit.model = o.model;
  ao.fit.fit_titer = o.fit_titer;
  ao.fit.fit_carbonate = o.fit_carbonate;
  ao.fit.fit_electrode = !o.fix_electrode;
  for (const std::string& h : o.fit_hold) {
    const auto eq = h.find('=');
    double value = 0;
    char extra = 0;
    if (eq == std::string::npos || eq == 0 || std::sscanf(h.c_str() + eq + 1, "%lf%c", &value, &extra) != 1 ||
        !std::isfinite(value)) {
      throw InputError({"--fit-hold", 0, 0}, "'" + h + "' is not of the form NAME=VALUE", "e.g. --fit-hold pKa1=2.95");
    }
    ao.fit.hold.emplace_back(h.substr(0, eq), value);
  }
  if (o.fit_loss == "cauchy") ao.fit.loss = fit::LossKind::cauchy;
  if (o.fit_loss == "none") ao.fit.loss = fit::LossKind::none;
  if (o.fit_loss_scale) ao.fit.loss_scale = *o.fit_loss_scale;
  if (o.fit_criterion == "aicc") ao.fit.criterion = fit::Criterion::aicc;
  if (o.fit_ideal) ao.fit.activity = chem::ActivityModel::ideal;
  if (o.ionic_strength_mol_L) ao.fit.background_ionic_strength_mol_L = *o.ionic_strength_mol_L;
  if (const auto p = ao.validate(); !p.empty()) throw InputError({"options", 0, 0}, p.front());
  return ao;
}

std::optional<method::Method> load_method_option(const RunOptions& o) {
  if (o.method_file.empty()) return std::nullopt;
  method::Method m = method::load_method(o.method_file);
  // What the command line says wins over the method too (the user typed it for this run).
  if (o.sample_volume_mL && m.sample_volume_mL) m.sample_volume_mL = o.sample_volume_mL;
  if (o.titrant_conc_mol_L) {
    m.titrant_conc_mol_L = o.titrant_conc_mol_L;
    m.titrant_conc_u_mol_L = 0.0;  // no uncertainty was given with it
    m.titer_file.clear();
  }
  return m;
}

void apply_facts(const RunOptions& o, Run& run) {
  if (o.sample_volume_mL) run.facts.sample_volume_mL = o.sample_volume_mL;
  if (o.titrant_conc_mol_L) run.facts.titrant_conc_mol_L = o.titrant_conc_mol_L;
  if (o.titrant == "acid") run.facts.titrant_kind = TitrantKind::acid;
  if (o.titrant == "base") run.facts.titrant_kind = TitrantKind::base;
  if (o.temperature_C) run.facts.temperature_C = o.temperature_C;
}

std::string fingerprint(const RunOptions& o) {
  // Every option that can change a result. The method file is not here: its
  // content hash enters the batch's resumability key on its own.
  auto num = [](const std::optional<double>& v) { return v ? fmt::format("{:.17g}", *v) : std::string("-"); };
  std::string holds;
  for (const auto& h : o.fit_hold) holds += (holds.empty() ? "" : "|") + h;
  return fmt::format(
      "sample_volume={};titrant_conc={};titrant={};temperature={};columns={};volume_unit={};signal={};sort={};"
      "max_size={:.17g};e0={};slope={};buffers={};window={};min_height={};min_separation={};gran_window={};"
      "analyte_charge={};drop_volume={};no_fit={};model={};fit_titer={};fit_carbonate={};fix_electrode={};"
      "fit_hold={};fit_loss={};fit_loss_scale={};fit_criterion={};fit_ideal={};ionic_strength={}",
      num(o.sample_volume_mL),
      num(o.titrant_conc_mol_L),
      o.titrant,
      num(o.temperature_C),
      o.columns,
      o.volume_unit,
      o.signal,
      o.sort,
      o.max_size_MiB,
      num(o.e0_mV),
      num(o.slope_mV),
      o.buffers,
      o.window,
      num(o.min_height),
      num(o.min_separation_mL),
      o.gran_window,
      o.analyte_charge ? std::to_string(*o.analyte_charge) : std::string("-"),
      num(o.drop_volume_mL),
      o.no_fit,
      o.model,
      o.fit_titer,
      o.fit_carbonate,
      o.fix_electrode,
      holds,
      o.fit_loss,
      num(o.fit_loss_scale),
      o.fit_criterion,
      o.fit_ideal,
      num(o.ionic_strength_mol_L));
}

// Any new field of RunOptions must be added to fingerprint() above: a batch resumed after a changed
// option would otherwise keep stale results. The size check reminds whoever adds one.
static_assert(sizeof(RunOptions) == 560, "RunOptions changed: update fingerprint() and this size");

}  // namespace veq::cli
