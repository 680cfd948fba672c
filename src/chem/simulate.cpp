// SPDX-License-Identifier: MIT
// The run simulator: dosing, electrode response, noise, and the stoichiometric equivalence points.
#include "veq/chem/simulate.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <random>

#include "veq/core/constants.hpp"

namespace veq::chem {
namespace {

// A portable random stream: std::mt19937_64's output sequence is fixed by the
// C++ standard; the transforms below are ours, so every standard library gives
// the same numbers (std::normal_distribution is not specified that tightly).
class Random {
 public:
  explicit Random(std::uint64_t seed) : m_engine(seed) {}
  // Uniform on [0, 1) with 53 random bits.
  double uniform() { return static_cast<double>(m_engine() >> 11) * 0x1.0p-53; }
  // Standard normal by Marsaglia's polar method (Marsaglia & Bray, SIAM Rev. 6 (1964) 260).
  double normal() {
    while (true) {
      const double u = 2.0 * uniform() - 1.0;
      const double v = 2.0 * uniform() - 1.0;
      const double s = u * u + v * v;
      if (s > 0.0 && s < 1.0) return u * std::sqrt(-2.0 * std::log(s) / s);
    }
  }

 private:
  std::mt19937_64 m_engine;
};

void prefix(std::vector<std::string>& out, const std::vector<std::string>& in, const std::string& part) {
  for (const auto& s : in) out.push_back(part + ": " + s);
}

double quantise(double v, double resolution) {
  return std::round(v / resolution) * resolution;
}

}  // namespace

std::vector<std::string> DosingOptions::validate() const {
  std::vector<std::string> p;
  if (!(start_volume_mL >= 0.0)) p.push_back(fmt::format("start_volume_mL = {}: must be >= 0", start_volume_mL));
  if (!(final_volume_mL >= 0.0))
    p.push_back(fmt::format("final_volume_mL = {}: must be >= 0 (0: automatic)", final_volume_mL));
  if (final_volume_mL > 0.0 && !(final_volume_mL > start_volume_mL))
    p.push_back(
        fmt::format("final_volume_mL = {}: must exceed start_volume_mL = {}", final_volume_mL, start_volume_mL));
  if (!(volume_resolution_mL > 0.0 && volume_resolution_mL <= 1.0))
    p.push_back(fmt::format("volume_resolution_mL = {}: must be in (0, 1]", volume_resolution_mL));
  if (mode == DosingMode::constant && !(step_mL >= volume_resolution_mL))
    p.push_back(fmt::format("step_mL = {}: must be at least the burette resolution {}", step_mL, volume_resolution_mL));
  if (mode == DosingMode::dynamic) {
    if (!(target_dpH > 0.0 && target_dpH <= 2.0))
      p.push_back(fmt::format("target_dpH = {}: must be in (0, 2]", target_dpH));
    if (!(min_step_mL >= volume_resolution_mL))
      p.push_back(fmt::format(
          "min_step_mL = {}: must be at least the burette resolution {}", min_step_mL, volume_resolution_mL));
    if (!(max_step_mL >= min_step_mL))
      p.push_back(fmt::format("max_step_mL = {}: must be at least min_step_mL = {}", max_step_mL, min_step_mL));
  }
  if (max_points < 2 || max_points > 1000000)
    p.push_back(fmt::format("max_points = {}: must be in [2, 1000000]", max_points));
  return p;
}

std::vector<std::string> ElectrodeOptions::validate() const {
  std::vector<std::string> p;
  if (!(std::fabs(e0_mV) <= 1000.0)) p.push_back(fmt::format("e0_mV = {}: must be within +-1000 mV", e0_mV));
  if (!(slope_efficiency >= 0.8 && slope_efficiency <= 1.1))
    p.push_back(fmt::format("slope_efficiency = {}: must be in [0.8, 1.1]", slope_efficiency));
  return p;
}

std::vector<std::string> NoiseOptions::validate() const {
  std::vector<std::string> p;
  if (!(sd >= 0.0 && sd <= 100.0)) p.push_back(fmt::format("sd = {}: must be in [0, 100]", sd));
  if (!(std::fabs(drift_per_min) <= 100.0))
    p.push_back(fmt::format("drift_per_min = {}: must be within +-100", drift_per_min));
  if (!(outlier_fraction >= 0.0 && outlier_fraction <= 0.5))
    p.push_back(fmt::format("outlier_fraction = {}: must be in [0, 0.5]", outlier_fraction));
  if (!(outlier_size >= 0.0 && outlier_size <= 1000.0))
    p.push_back(fmt::format("outlier_size = {}: must be in [0, 1000]", outlier_size));
  if (!(reading_interval_s > 0.0 && reading_interval_s <= 3600.0))
    p.push_back(fmt::format("reading_interval_s = {}: must be in (0, 3600]", reading_interval_s));
  return p;
}

std::vector<std::string> SimulationOptions::validate() const {
  std::vector<std::string> p;
  if (sample_id.empty()) p.push_back("sample_id: must not be empty");
  prefix(p, sample.validate(), "sample");
  prefix(p, titrant.validate(), "titrant");
  prefix(p, model.validate(), "model");
  prefix(p, dosing.validate(), "dosing");
  prefix(p, electrode.validate(), "electrode");
  prefix(p, noise.validate(), "noise");
  prefix(p, solve.validate(), "solve");
  return p;
}

std::vector<EquivalencePoint> equivalence_points(const Sample& sample,
                                                 const Titrant& titrant,
                                                 const ModelOptions& model_options,
                                                 const Titration<double>& titration) {
  struct Step {
    double pKa;
    double conc;
    std::string name;
    int step;
  };
  const bool base = titrant.kind != TitrantKind::acid;
  const double inf = std::numeric_limits<double>::infinity();
  std::vector<Step> steps;
  double opposite = 0.0;  // equivalents of the sample that consume the sample's own titratable species
  for (const Analyte& a : sample.analytes) {
    switch (a.kind) {
      case AnalyteKind::strong_acid:
        if (base)
          steps.push_back({-inf, a.conc_mol_L, a.name, 0});
        else
          opposite += a.conc_mol_L;
        break;
      case AnalyteKind::strong_base:
        if (base)
          opposite += a.conc_mol_L;
        else
          steps.push_back({inf, a.conc_mol_L, a.name, 0});
        break;
      case AnalyteKind::weak:
        for (std::size_t j = 0; j < a.pKa_25C.size(); ++j) {
          // Step j+1 takes form j to form j+1: base titrates the steps the added form still has protons for.
          const bool titratable = base ? static_cast<int>(j) >= a.added_form : static_cast<int>(j) < a.added_form;
          if (titratable) {
            steps.push_back({a.pKa_at(j, model_options.temperature_C), a.conc_mol_L, a.name, static_cast<int>(j + 1)});
          }
        }
        break;
    }
  }
  std::stable_sort(steps.begin(), steps.end(), [base](const Step& l, const Step& r) {
    return base ? l.pKa < r.pKa : l.pKa > r.pKa;
  });
  std::vector<EquivalencePoint> out;
  double cumulative = -opposite;
  for (const Step& s : steps) {
    cumulative += s.conc;
    if (cumulative <= 0.0 || s.conc <= 0.0) continue;
    EquivalencePoint e;
    e.index = static_cast<int>(out.size()) + 1;
    e.volume_mL = sample.volume_mL * cumulative / titrant.conc_mol_L;
    e.pH = titration.pH(e.volume_mL);
    e.analyte = s.name;
    e.step = s.step;
    e.pKa = std::isfinite(s.pKa) ? s.pKa : std::numeric_limits<double>::quiet_NaN();
    out.push_back(e);
  }
  return out;
}

Simulation simulate(const SimulationOptions& options) {
  if (const auto p = options.validate(); !p.empty()) {
    std::string all;
    for (const auto& s : p) all += (all.empty() ? "" : "; ") + s;
    throw InputError({"simulate", 0, 0}, all);
  }
  Simulation sim;
  sim.options = options;
  sim.model = build_model(options.sample, options.titrant, options.model);
  const Titration<double> titration(sim.model, options.solve);
  sim.equivalence_points = equivalence_points(options.sample, options.titrant, options.model, titration);
  sim.electrode_slope_mV = options.electrode.slope_efficiency * nernst_slope_mV(options.model.temperature_C);

  const DosingOptions& d = options.dosing;
  const double res = d.volume_resolution_mL;
  double final_mL = d.final_volume_mL;
  if (final_mL <= 0.0) {
    if (sim.equivalence_points.empty()) {
      throw InputError({"simulate", 0, 0},
                       "the sample has nothing this titrant titrates, so there is no end volume to choose",
                       "give the final volume (--final-volume, or dosing.final_volume_mL)");
    }
    final_mL = 1.3 * sim.equivalence_points.back().volume_mL;
  }
  final_mL = quantise(final_mL, res);
  if (!(final_mL > d.start_volume_mL)) {
    throw InputError(
        {"simulate", 0, 0},
        fmt::format("final volume {} mL is not beyond the start volume {} mL", final_mL, d.start_volume_mL));
  }

  // Volumes to dose.
  Equilibrium warm;
  auto solve = [&](double v) {
    const Point<double> p = titration.solve(v, &warm);
    if (!p.state.converged) {
      throw InputError({"simulate", 0, 0},
                       fmt::format("the charge balance could not be solved at {} mL", v),
                       "check the model: concentrations, pKa values and titrant");
    }
    return p;
  };
  std::vector<std::pair<double, Point<double>>> dosed;
  double v = quantise(d.start_volume_mL, res);
  dosed.emplace_back(v, solve(v));
  if (d.mode == DosingMode::constant) {
    for (std::size_t i = 1;; ++i) {
      const double next = quantise(d.start_volume_mL + static_cast<double>(i) * d.step_mL, res);
      if (next > final_mL + 0.5 * res) break;
      if (dosed.size() >= d.max_points) {
        throw InputError({"simulate", 0, 0},
                         fmt::format("the run would exceed {} readings", d.max_points),
                         "use a larger step or a smaller final volume");
      }
      dosed.emplace_back(next, solve(next));
    }
  } else {
    // As automatic titrators dose: the next increment is predicted from the
    // last one so that the pH changes by about target_dpH, within [min, max];
    // an increment that overshoots by more than half again is shortened.
    double step = d.min_step_mL;
    while (v < final_mL - 0.5 * res) {
      if (dosed.size() >= d.max_points) {
        throw InputError({"simulate", 0, 0},
                         fmt::format("the run would exceed {} readings", d.max_points),
                         "use a larger target pH change or minimum step");
      }
      const double pH_now = dosed.back().second.pH;
      Equilibrium from = warm;
      double next = 0.0, change = 0.0;
      Point<double> p;
      for (int attempt = 0; attempt < 30; ++attempt) {
        step = std::clamp(step, d.min_step_mL, d.max_step_mL);
        next = std::min(final_mL, quantise(v + step, res));
        if (next <= v) next = v + res;
        warm = from;
        p = solve(next);
        change = std::fabs(p.pH - pH_now);
        if (change <= 1.5 * d.target_dpH || step <= d.min_step_mL) break;
        step = std::max(d.min_step_mL, 0.9 * step * d.target_dpH / change);
      }
      dosed.emplace_back(next, p);
      const double taken = next - v;
      v = next;
      step = taken * d.target_dpH / std::max(change, 1e-3 * d.target_dpH);
    }
  }

  // Electrode, drift, noise, outliers.
  Random rng(options.noise.seed);
  const NoiseOptions& n = options.noise;
  const bool mv = options.electrode.signal == SignalKind::mv;
  double max_I = 0.0;
  sim.readings.reserve(dosed.size());
  for (std::size_t i = 0; i < dosed.size(); ++i) {
    SimulatedReading r;
    r.volume_mL = dosed[i].first;
    r.state = dosed[i].second.state;
    r.pH_true = dosed[i].second.pH;
    r.time_s = static_cast<double>(i) * n.reading_interval_s;
    r.signal_true = mv ? options.electrode.e0_mV - sim.electrode_slope_mV * r.pH_true : r.pH_true;
    // Draw the same numbers for every reading whatever the settings, so that
    // changing one kind of noise does not move the others.
    const double z = rng.normal();
    const double u_outlier = rng.uniform();
    const double u_sign = rng.uniform();
    r.outlier = u_outlier < n.outlier_fraction;
    r.signal = r.signal_true + n.drift_per_min * r.time_s / 60.0 + n.sd * z;
    if (r.outlier) r.signal += (u_sign < 0.5 ? -1.0 : 1.0) * n.outlier_size;
    max_I = std::max(max_I, r.state.ionic_strength_mol_L);
    sim.readings.push_back(r);
  }
  if (sim.model.activity == ActivityModel::davies && max_I > 0.5) {
    sim.warnings.push_back({"davies_range",
                            fmt::format("ionic strength reaches {:.3g} mol/L, beyond the 0.5 mol/L up to which the "
                                        "Davies equation is meant",
                                        max_I),
                            {}});
  }
  return sim;
}

}  // namespace veq::chem
