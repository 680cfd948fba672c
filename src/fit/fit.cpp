// SPDX-License-Identifier: MIT
// The charge-balance fit: candidates, initial guesses, the solve, model selection, uncertainty and results.
#include "veq/fit/fit.hpp"

#include <ceres/iteration_callback.h>
#include <ceres/loss_function.h>
#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>
#include <numeric>

#include "fit/layout.hpp"
#include "fit/residual.hpp"
#include "fit/solver.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/sample.hpp"
#include "veq/core/constants.hpp"
#include "veq/signal/prepare.hpp"

namespace veq::fit {

// ---- names -----------------------------------------------------------------------------------------------

namespace {

struct KindName {
  ModelKind kind;
  const char* name;
};
// clang-format off
constexpr KindName kKindNames[] = {
    {ModelKind::strong_acid, "strong_acid"},
    {ModelKind::weak_acid, "weak_acid"},
    {ModelKind::diprotic_acid, "diprotic_acid"},
    {ModelKind::triprotic_acid, "triprotic_acid"},
    {ModelKind::strong_weak_acid, "strong_weak_acid"},
    {ModelKind::acid_salt, "acid_salt"},
    {ModelKind::strong_base, "strong_base"},
    {ModelKind::weak_base, "weak_base"},
    {ModelKind::carbonate_base, "carbonate_base"},
    {ModelKind::strong_weak_base, "strong_weak_base"},
    {ModelKind::hydroxide_carbonate, "hydroxide_carbonate"},
    {ModelKind::carbonate_bicarbonate, "carbonate_bicarbonate"},
    {ModelKind::analyte, "analyte"},
};
// clang-format on

}  // namespace

std::string_view to_string(ModelKind kind) {
  for (const auto& k : kKindNames) {
    if (k.kind == kind) return k.name;
  }
  return "analyte";
}

std::optional<ModelKind> model_kind_from_string(std::string_view name) {
  for (const auto& k : kKindNames) {
    if (k.kind != ModelKind::analyte && name == k.name) return k.kind;
  }
  return std::nullopt;
}

const std::vector<ModelKind>& model_kinds() {
  static const std::vector<ModelKind> kinds = [] {
    std::vector<ModelKind> v;
    for (const auto& k : kKindNames) {
      if (k.kind != ModelKind::analyte) v.push_back(k.kind);
    }
    return v;
  }();
  return kinds;
}

std::string_view to_string(LossKind kind) {
  switch (kind) {
    case LossKind::huber:
      return "huber";
    case LossKind::cauchy:
      return "cauchy";
    case LossKind::none:
      return "none";
  }
  return "huber";
}

std::string_view to_string(Criterion c) {
  return c == Criterion::bic ? "bic" : "aicc";
}

std::string_view to_string(FitStatus s) {
  switch (s) {
    case FitStatus::not_run:
      return "not_run";
    case FitStatus::failed:
      return "failed";
    case FitStatus::converged:
      return "converged";
    case FitStatus::stopped:
      return "stopped";
  }
  return "not_run";
}

std::vector<std::string> FitOptions::validate() const {
  std::vector<std::string> p;
  if (!(loss_scale > 0.0 && loss_scale <= 100.0))
    p.push_back(fmt::format("fit loss_scale = {}: must be in (0, 100]", loss_scale));
  if (max_iterations < 1 || max_iterations > 10000)
    p.push_back(fmt::format("fit max_iterations = {}: must be in [1, 10000]", max_iterations));
  for (const auto& [name, value] :
       std::initializer_list<std::pair<const char*, double>>{{"function_tolerance", function_tolerance},
                                                             {"parameter_tolerance", parameter_tolerance},
                                                             {"gradient_tolerance", gradient_tolerance}}) {
    if (!(value > 0.0 && value < 1e-2)) p.push_back(fmt::format("fit {} = {}: must be in (0, 0.01)", name, value));
  }
  if (!(runs_test_alpha > 0.0 && runs_test_alpha < 0.5))
    p.push_back(fmt::format("fit runs_test_alpha = {}: must be in (0, 0.5)", runs_test_alpha));
  if (!(max_residual_ratio >= 1.0))
    p.push_back(fmt::format("fit max_residual_ratio = {}: must be >= 1", max_residual_ratio));
  if (max_points < 20) p.push_back(fmt::format("fit max_points = {}: must be at least 20", max_points));
  if (screen_points != 0 && (screen_points < 20 || screen_points > 100000))
    p.push_back(fmt::format("fit screen_points = {}: must be 0 (no screening) or in [20, 100000]", screen_points));
  if (!(background_ionic_strength_mol_L >= 0.0 && background_ionic_strength_mol_L <= 5.0))
    p.push_back(
        fmt::format("fit background_ionic_strength_mol_L = {}: must be in [0, 5]", background_ionic_strength_mol_L));
  if (standard_amount_mmol && !(*standard_amount_mmol > 0.0 && std::isfinite(*standard_amount_mmol)))
    p.push_back(fmt::format("fit standard_amount_mmol = {}: must be positive", *standard_amount_mmol));
  for (const auto& [name, value] : hold) {
    if (!std::isfinite(value)) p.push_back(fmt::format("fit hold {} = {}: must be finite", name, value));
  }
  return p;
}

const Parameter* FitSummary::parameter(std::string_view name) const {
  for (const auto& p : parameters) {
    if (p.name == name) return &p;
  }
  return nullptr;
}

bool FitSummary::usable() const {
  if (status != FitStatus::converged) return false;
  for (const auto& f : flags) {
    if (f == kFlagNotConverged || f == kFlagAtBound || f == kFlagCovarianceFailed || f == kFlagResidualPattern ||
        f == kFlagPoorFit || f == kFlagStepsMerged)
      return false;
  }
  return true;
}

bool FitResult::usable() const {
  return best && best->usable();
}

// ---- model shapes ----------------------------------------------------------------------------------------

namespace detail {

ModelShape shape_of(ModelKind kind) {
  ModelShape s;
  s.kind = kind;
  s.name = std::string(to_string(kind));
  switch (kind) {
    case ModelKind::strong_acid:
    case ModelKind::strong_base:
      s.strong = true;
      break;
    case ModelKind::weak_acid:
      s.weak_steps = 1;
      break;
    case ModelKind::diprotic_acid:
      s.weak_steps = 2;
      break;
    case ModelKind::triprotic_acid:
      s.weak_steps = 3;
      break;
    case ModelKind::strong_weak_acid:
      s.strong = true;
      s.weak_steps = 1;
      break;
    case ModelKind::acid_salt:
      s.weak_steps = 2;
      s.added_form = 1;
      break;
    case ModelKind::weak_base:
      s.weak_steps = 1;
      s.top_charge = 1;
      s.added_form = 1;
      break;
    case ModelKind::carbonate_base:
      s.weak_steps = 2;
      s.added_form = 2;
      break;
    case ModelKind::strong_weak_base:
      s.strong = true;
      s.weak_steps = 1;
      s.top_charge = 1;
      s.added_form = 1;
      break;
    case ModelKind::hydroxide_carbonate:
      s.strong = true;
      s.weak_steps = 2;
      s.added_form = 2;
      break;
    case ModelKind::carbonate_bicarbonate:
      s.weak_steps = 2;
      s.added_form = 2;
      s.second_added_form = 1;
      break;
    case ModelKind::analyte:
      break;
  }
  return s;
}

}  // namespace detail

namespace {

using detail::Layout;
using detail::ModelShape;
using detail::Observations;
using detail::ParamDef;
using detail::Role;
using detail::WarmStates;

// Titrated with a base: acid kinds; with an acid: base kinds.
bool is_acid_kind(ModelKind k) {
  return k == ModelKind::strong_acid || k == ModelKind::weak_acid || k == ModelKind::diprotic_acid ||
         k == ModelKind::triprotic_acid || k == ModelKind::strong_weak_acid || k == ModelKind::acid_salt;
}

// The weak steps a titrant of that kind converts, as 0-based pKa indices in the order they are titrated.
std::vector<int> titrated_steps(const ModelShape& s, bool base_titrant) {
  std::vector<int> j;
  if (base_titrant) {
    for (int i = s.added_form; i < s.weak_steps; ++i) j.push_back(i);
  } else {
    for (int i = s.added_form - 1; i >= 0; --i) j.push_back(i);
  }
  return j;
}

// What the fit knows about the run, ready for the candidates.
struct Prepared {
  Observations obs;
  SignalKind signal = SignalKind::ph;
  bool base_titrant = true;
  double noise = 0.0;  // reading noise SD, floored [signal unit]
  double v_first = 0.0, v_last = 0.0;
  std::vector<double> endpoint_mL;              // consensus volumes, ascending
  std::vector<double> endpoint_snr;             // their derivative peaks' signal-to-noise ratios
  std::vector<std::optional<double>> gran_pKa;  // per endpoint: the buffer line's pKa before it
  double temperature_C = 25.0;
  double nernst_mV = 59.16;
  std::optional<double> e0_guess_mV;  // mV runs: E0 from the excess-titrant readings (stoichiometry alone)
  FitInputs inputs;
};

// The curve's readings at index i as pH (for guesses), given an E0 for mV runs.
double reading_as_pH(const Prepared& p, double value, double e0_mV) {
  if (p.signal == SignalKind::ph) return value;
  return (e0_mV - value) / p.nernst_mV;
}

// Linear interpolation of the readings at volume v (clamped to the ends).
double reading_at(const Prepared& p, double v) {
  const auto& V = p.obs.volume_mL;
  const auto& y = p.obs.value;
  if (v <= V.front()) return y.front();
  if (v >= V.back()) return y.back();
  const auto it = std::upper_bound(V.begin(), V.end(), v);
  const std::size_t i = static_cast<std::size_t>(it - V.begin());
  const double t = (v - V[i - 1]) / (V[i] - V[i - 1]);
  return y[i - 1] + t * (y[i] - y[i - 1]);
}

// A model to fit, with where it starts.
struct Start {
  double V_strong = 0.0;  // equivalence volume of the strong part [mL]
  double V_weak = 0.0;    // volume per titrated weak step [mL]
  double V_second = 0.0;  // the second salt's volume per step it takes part in [mL]
};

// Whether the second salt of a shape (bicarbonate beside carbonate) takes part in titrated step j.
bool second_titrates(const ModelShape& s, int j, bool base_titrant) {
  if (s.second_added_form < 0) return false;
  return base_titrant ? j >= s.second_added_form : j < s.second_added_form;
}

// The start's equivalence volumes after each titrated step (cumulative), the strong part first.
std::vector<double> cumulative_volumes(const ModelShape& s,
                                       const std::vector<int>& steps,
                                       const Start& st,
                                       bool base_titrant) {
  std::vector<double> v;
  double cum = st.V_strong;
  for (int j : steps) {
    cum += st.V_weak + (second_titrates(s, j, base_titrant) ? st.V_second : 0.0);
    v.push_back(cum);
  }
  return v;
}

double cum_end(const ModelShape& s, const std::vector<int>& steps, const Start& st, bool base) {
  const std::vector<double> c = cumulative_volumes(s, steps, st, base);
  return c.empty() ? st.V_strong : c.back();
}

// Placeholder pKa values of a shape (the E0 guess of a mV run needs some).
double default_pKa(const ModelShape& s, int j) {
  if (j < static_cast<int>(s.table_pKa.size())) return s.table_pKa[static_cast<std::size_t>(j)];
  if (s.added_form == 0) return 3.0 + 3.0 * j;                    // acids
  if (s.kind == ModelKind::acid_salt) return j == 0 ? 3.0 : 5.5;  // phthalate-like
  if (s.weak_steps == 1) return 9.25;                             // an ammonia-like base
  return j == 0 ? 6.35 : 10.33;                                   // carbonate-like
}

ParamDef param(std::string name,
               std::string unit,
               Role role,
               double lower,
               double upper,
               double initial,
               double scale,
               int step = 0) {
  ParamDef d;
  d.name = std::move(name);
  d.unit = std::move(unit);
  d.role = role;
  d.step = step;
  d.lower = lower;
  d.upper = upper;
  d.initial = std::clamp(initial, lower, upper);
  d.scale = scale;
  return d;
}

constexpr double kMinConc = 1e-7;
constexpr double kMaxConc = 10.0;
constexpr double kMin_pKa = -2.0;
constexpr double kMax_pKa = 16.0;

// Builds a candidate at a start. Throws InputError for a held parameter the model lacks.
Layout make_layout(const ModelShape& s, const Prepared& p, const FitOptions& o, const Start& st) {
  Layout L;
  L.shape = s;
  L.signal = p.signal;
  L.nominal_titrant_mol_L = p.inputs.titrant_conc_mol_L;
  const double V0 = p.inputs.sample_volume_mL;
  const double Ct = p.inputs.titrant_conc_mol_L;

  // Base chemistry from chem::build_model, with placeholders the parameters overwrite.
  chem::Sample sample;
  sample.volume_mL = V0;
  sample.background_ionic_strength_mol_L = o.background_ionic_strength_mol_L;
  if (s.strong) {
    chem::Analyte a;
    a.name = "strong";
    a.kind = p.base_titrant ? chem::AnalyteKind::strong_acid : chem::AnalyteKind::strong_base;
    a.conc_mol_L = 0.01;
    sample.analytes.push_back(a);
  }
  if (s.weak_steps > 0) {
    chem::Analyte a;
    a.name = "weak";
    a.kind = chem::AnalyteKind::weak;
    a.conc_mol_L = 0.01;
    a.top_charge = s.top_charge;
    a.added_form = s.added_form;
    for (int j = 0; j < s.weak_steps; ++j) a.pKa_25C.push_back(1.0 + j);
    sample.analytes.push_back(a);
    if (s.second_added_form >= 0) {
      a.name = "weak (second salt)";
      a.added_form = s.second_added_form;
      sample.analytes.push_back(a);
    }
  }
  chem::Titrant titrant;
  titrant.kind = p.base_titrant ? TitrantKind::base : TitrantKind::acid;
  titrant.conc_mol_L = Ct;
  titrant.carbonate_fraction = (o.fit_carbonate && p.base_titrant) ? 0.01 : 0.0;
  chem::ModelOptions mo;
  mo.temperature_C = p.temperature_C;
  mo.activity = o.activity;
  L.base = chem::build_model(sample, titrant, mo);

  // Concentrations from the start volumes (or the standard's known amount).
  const std::vector<int> steps = titrated_steps(s, p.base_titrant);
  const int nt = static_cast<int>(steps.size());
  double titer = 1.0;
  double c_strong = Ct * st.V_strong / V0;
  double c_weak = Ct * st.V_weak / V0;
  std::optional<double> known_conc;
  if (o.standard_amount_mmol) known_conc = *o.standard_amount_mmol / V0;
  if (known_conc) {
    // The standard is the weak system when there is one, else the strong component.
    const double observed_mL = s.weak_steps > 0 ? st.V_weak : st.V_strong;
    if (s.weak_steps > 0)
      c_weak = *known_conc;
    else
      c_strong = *known_conc;
    if (o.fit_titer && observed_mL > 0.0) titer = *known_conc * V0 / (Ct * observed_mL);
    titer = std::clamp(titer, 0.6, 1.4);
  }
  if (s.strong) {
    const double c0 = std::max(c_strong, 1e-5);
    const bool held = known_conc && s.weak_steps == 0;
    L.params.push_back(param(s.weak_steps > 0 ? "c_strong" : "c",
                             "mol/L",
                             Role::c_strong,
                             kMinConc,
                             kMaxConc,
                             held ? *known_conc : c0,
                             std::max(c0, 1e-6)));
    if (held) L.params.back().index = -2;  // marked: held (resolved below)
  }
  if (s.weak_steps > 0) {
    const double c0 = std::max(c_weak, 1e-5);
    L.params.push_back(
        param("c", "mol/L", Role::c, kMinConc, kMaxConc, known_conc ? *known_conc : c0, std::max(c0, 1e-6)));
    if (known_conc) L.params.back().index = -2;
    if (s.second_added_form >= 0) {
      const double c2 = std::max(Ct * st.V_second / V0, 1e-5);
      L.params.push_back(param("c_bicarbonate", "mol/L", Role::c_second, kMinConc, kMaxConc, c2, std::max(c2, 1e-6)));
    }
  }

  // pKa guesses: the half-equivalence pH of each titrated step, the Gran buffer pKa where an endpoint
  // matches the step's equivalence point, the table for steps not titrated.
  double e0_guess = p.e0_guess_mV.value_or(0.0);
  if (p.signal == SignalKind::mv && !p.e0_guess_mV) {
    // E0 from the readings where the model pH does not depend on the pKa values: beyond the last
    // equivalence point (excess titrant); else from all readings with placeholder pKa values.
    chem::Model<double> m = L.base;
    if (s.strong) (p.base_titrant ? m.strong_acid_mol_L : m.strong_base_mol_L) = c_strong;
    if (s.weak_steps > 0) {
      m.protolytes[0].conc_mol_L = c_weak;
      if (m.protolytes.size() > 1) m.protolytes[1].conc_mol_L = Ct * st.V_second / V0;
      for (auto& q : m.protolytes) {
        for (int j = 0; j < s.weak_steps; ++j) q.pKa[static_cast<std::size_t>(j)] = default_pKa(s, j);
      }
    }
    m.titrant_conc_mol_L = titer * Ct;
    const chem::Titration<double> t(m);
    const double v_end = nt > 0 ? cum_end(s, steps, st, p.base_titrant) : st.V_strong;
    std::vector<double> e0s, all;
    chem::Equilibrium warm;
    for (std::size_t i = 0; i < p.obs.volume_mL.size(); ++i) {
      const double v = p.obs.volume_mL[i];
      const double pH = t.pH(v, &warm);
      if (!std::isfinite(pH)) continue;
      const double e0 = p.obs.value[i] + p.nernst_mV * pH;
      all.push_back(e0);
      if (v > 1.15 * v_end) e0s.push_back(e0);
    }
    std::vector<double>& use = e0s.size() >= 3 ? e0s : all;
    if (!use.empty()) {
      std::nth_element(use.begin(), use.begin() + static_cast<long>(use.size() / 2), use.end());
      e0_guess = use[use.size() / 2];
    }
  }
  std::vector<double> pKa(static_cast<std::size_t>(s.weak_steps), 0.0);
  for (int j = 0; j < s.weak_steps; ++j) pKa[static_cast<std::size_t>(j)] = default_pKa(s, j);
  double last = std::numeric_limits<double>::quiet_NaN();
  const std::vector<double> cum = cumulative_volumes(s, steps, st, p.base_titrant);
  for (int i = 0; i < nt; ++i) {
    const int j = steps[static_cast<std::size_t>(i)];
    const double v_eq = cum[static_cast<std::size_t>(i)];
    const double mid = 0.5 * (v_eq + (i == 0 ? st.V_strong : cum[static_cast<std::size_t>(i - 1)]));
    double guess = std::numeric_limits<double>::quiet_NaN();
    for (std::size_t e = 0; e < p.endpoint_mL.size(); ++e) {
      if (e < p.gran_pKa.size() && p.gran_pKa[e] && std::fabs(p.endpoint_mL[e] - v_eq) <= 0.05 * v_eq)
        guess = *p.gran_pKa[e];
    }
    if (!std::isfinite(guess) && mid >= p.v_first && mid <= p.v_last) {
      guess = reading_as_pH(p, reading_at(p, mid), e0_guess);
    }
    if (!std::isfinite(guess)) {
      // A step whose buffer region the readings do not reach: far beyond the last reading, where it barely
      // shapes the curve (the fit brings it closer if the readings ask for it).
      const double end_pH = reading_as_pH(p, p.obs.value.back(), e0_guess);
      guess = end_pH + (p.base_titrant ? 3.0 : -3.0);
      if (std::isfinite(last)) guess = p.base_titrant ? std::max(guess, last + 1.0) : std::min(guess, last - 1.0);
    }
    pKa[static_cast<std::size_t>(j)] = guess;
    last = guess;
  }
  for (int j = 0; j < s.weak_steps; ++j) {
    L.params.push_back(param(
        fmt::format("pKa{}", j + 1), "", Role::pKa, kMin_pKa, kMax_pKa, pKa[static_cast<std::size_t>(j)], 1.0, j));
  }

  // Electrode.
  if (p.signal == SignalKind::ph) {
    L.params.push_back(param("offset", "pH", Role::offset, -1.0, 1.0, 0.0, 1.0));
    if (!o.fit_electrode) L.params.back().index = -2;
  } else {
    L.params.push_back(param("E0", "mV", Role::e0, e0_guess - 300.0, e0_guess + 300.0, e0_guess, 60.0));
    if (!o.fit_electrode) L.params.back().index = -2;
    L.params.push_back(param("slope",
                             "mV/pH",
                             Role::slope,
                             signal::kMinSlopeFraction * p.nernst_mV,
                             signal::kMaxSlopeFraction * p.nernst_mV,
                             p.nernst_mV,
                             60.0));
    if (!o.fit_electrode) L.params.back().index = -2;
  }
  if (o.fit_titer) L.params.push_back(param("titer", "", Role::titer, 0.5, 1.5, titer, 1.0));
  if (o.fit_carbonate && p.base_titrant) {
    L.params.push_back(param("carbonate_fraction", "", Role::carbonate, 0.0, 0.5, 0.005, 0.01));
  }

  // Held parameters, then the free ones get their positions.
  for (const auto& held : o.hold) {
    // (not a structured binding: clang before 16 cannot capture one in a lambda)
    const std::string& name = held.first;
    const double value = held.second;
    auto it = std::find_if(L.params.begin(), L.params.end(), [&](const ParamDef& d) { return d.name == name; });
    if (it == L.params.end()) {
      std::string names;
      for (const auto& d : L.params) names += (names.empty() ? "" : ", ") + d.name;
      throw InputError({"options", 0, 0},
                       fmt::format("--fit-hold {}: model {} has no such parameter", name, s.name),
                       "its parameters: " + names);
    }
    it->initial = value;
    it->index = -2;
  }
  L.free_count = 0;
  for (auto& d : L.params) {
    if (d.index == -2) {
      d.index = -1;
    } else {
      d.index = L.free_count++;
    }
  }
  return L;
}

// The fitted equivalence volumes of a layout at u: V_k = V0 (c_strong + k c) / (t Ct), the titrated steps in order.
std::vector<double> equivalence_volumes(const Layout& L, const double* u, bool base_titrant) {
  const chem::Model<double> m = L.model(u);
  const double V0 = m.sample_volume_mL;
  const double Ct = m.titrant_conc_mol_L;
  const double cs = base_titrant ? m.strong_acid_mol_L : m.strong_base_mol_L;
  const int nt = static_cast<int>(titrated_steps(L.shape, base_titrant).size());
  const double cw = L.shape.weak_steps > 0 ? m.protolytes[0].conc_mol_L : 0.0;
  const double c2 = m.protolytes.size() > 1 ? m.protolytes[1].conc_mol_L : 0.0;
  std::vector<double> v;
  // Stoichiometric points, as chem::equivalence_points counts them: the strong part first (for a hydroxide
  // beside a carbonate it is not seen as an endpoint, but it is an equivalence point all the same), then
  // each titrated step (a second salt of the acid joins the steps it takes part in).
  if (L.shape.strong) v.push_back(V0 * cs / Ct);
  double cum = cs;
  for (int j : titrated_steps(L.shape, base_titrant)) {
    cum += cw + (second_titrates(L.shape, j, base_titrant) ? c2 : 0.0);
    v.push_back(V0 * cum / Ct);
  }
  (void)nt;
  return v;
}

// Adds the residual block over u to a problem (the problem owns the cost function).
void add_curve_block(ceres::Problem& problem, detail::CurveCost* cost, std::vector<double>& u) {
  problem.AddResidualBlock(cost, nullptr, u.data());
}

// One candidate fitted at one start.
struct Attempt {
  Layout layout;
  std::vector<double> u;
  detail::SolveReport report;
  std::unique_ptr<WarmStates> warm;
  double rho_sum = 0.0;             // sum rho(r^2) = 2 cost
  double least_squares_cost = 0.0;  // 1/2 sum r^2 after the first stage
  double score = std::numeric_limits<double>::infinity();
  bool ok = false;
  bool abandoned = false;
};

// The state at volumes[i] by Newton, from the state extrapolated linearly in volume from the two before
// (states[i - 2], states[i - 1]; their converged flags are not checked), else from the one before; false when
// both fail (s is then unspecified). i >= 1.
bool newton_next(const detail::FastBalance& fb,
                 const std::vector<double>& volumes,
                 const std::vector<chem::Equilibrium>& states,
                 std::size_t i,
                 chem::Equilibrium& s,
                 chem::detail::BalanceJacobian& jac) {
  const double V = volumes[i];
  if (i >= 2) {
    const chem::Equilibrium& a = states[i - 2];
    const chem::Equilibrium& b = states[i - 1];
    const double dv = volumes[i - 1] - volumes[i - 2];
    const double t = dv > 0.0 ? std::min((V - volumes[i - 1]) / dv, 2.0) : 0.0;
    s = b;
    s.log10_h += t * (b.log10_h - a.log10_h);
    s.log10_gamma1 += t * (b.log10_gamma1 - a.log10_gamma1);
    if (fb.newton(V, s, jac)) return true;
  }
  s = states[i - 1];
  return fb.newton(V, s, jac);
}

// The warm states of the first evaluation, reading by reading: newton_next (at the first reading, Newton
// from the reading itself when it is a pH, else from pH 7), the bracketing solver when Newton fails.
bool initial_states(const Layout& L, const std::vector<double>& u, const Observations& obs, WarmStates& warm) {
  const chem::Model<double> m = L.model(u.data());
  const detail::FastBalance fb(m);
  std::optional<chem::detail::FastModel> fm;
  const chem::SolveOptions so;
  const std::size_t n = obs.volume_mL.size();
  warm.state.assign(n, chem::Equilibrium{});
  warm.jacobian.assign(n, chem::detail::BalanceJacobian{});
  warm.tangent_valid = false;
  for (std::size_t i = 0; i < n; ++i) {
    const double V = obs.volume_mL[i];
    chem::Equilibrium s;
    bool ok = i >= 1 && newton_next(fb, obs.volume_mL, warm.state, i, s, warm.jacobian[i]);
    if (!ok && i == 0) {
      const double pH = L.signal == SignalKind::ph && std::isfinite(obs.value[0]) ? obs.value[0] : 7.0;
      s.log10_h = -std::clamp(pH, 0.0, 14.0);
      s.log10_gamma1 = 0.0;
      ok = fb.newton(V, s, warm.jacobian[i], 40);
    }
    if (!ok) {
      if (!fm) fm = chem::detail::make_fast_model(m);
      const chem::Equilibrium* prev = i >= 1 ? &warm.state[i - 1] : nullptr;
      s = chem::detail::solve_fast(*fm, V, prev, so, &warm.jacobian[i]);
      if (!s.converged) s = chem::detail::solve_fast(*fm, V, nullptr, so, &warm.jacobian[i]);
      if (!s.converged) return false;
    }
    warm.state[i] = s;
  }
  std::fill(warm.u.begin(), warm.u.end(), 0.0);
  std::copy(u.begin(), u.end(), warm.u.begin());
  warm.valid = true;
  return true;
}

// Stops a candidate that, after a few iterations, is still far worse than the best candidate so far (8
// times its cost: the criterion would be worse by n ln 8), or is worse and crawling (its cost fell by
// less than 0.1 % in the last iteration: to win with one more parameter it would have to end about 1 %
// below the best, 2/n for n = 200, which it will not reach at that pace within the iteration limit).
class AbandonCallback : public ceres::IterationCallback {
 public:
  explicit AbandonCallback(double best_cost) : m_best(best_cost) {}
  ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
    const bool far = s.iteration >= 2 && s.cost > 8.0 * m_best;
    const bool crawling = s.iteration >= 3 && s.cost > m_best && s.cost_change >= 0.0 && s.cost_change < 1e-3 * s.cost;
    if (far || crawling) {
      abandoned = true;
      return ceres::SOLVER_TERMINATE_SUCCESSFULLY;
    }
    return ceres::SOLVER_CONTINUE;
  }
  bool abandoned = false;

 private:
  double m_best;
};

// Stops a runner-up's refit once it has settled behind the winner: from the third iteration on, at a
// successful step that leaves it more than 10 units of the criterion behind, falling less than the
// successful step before it did (by a ratio r < 0.9), when the geometric rest of those falls, twice over
// (2 f r / (1 - r) for a fall f), would still leave it 10 units behind. Near its minimum a trust-region
// solve's falls shrink from step to step; after rejected steps they grow again as the region widens, which
// the ratio sees. The criterion is that of the attempt's score, on sum rho = 2 cost.
class SettleCallback : public ceres::IterationCallback {
 public:
  SettleCallback(int readings, int free, Criterion criterion, double winner)
      : m_n(readings), m_k(free + 1), m_criterion(criterion), m_winner(winner) {}
  ceres::CallbackReturnType operator()(const ceres::IterationSummary& s) override {
    if (s.iteration == 0 || !s.step_is_successful || !(s.cost > 0.0) || m_n <= m_k + 1) return ceres::SOLVER_CONTINUE;
    const double now = score(2.0 * s.cost);
    const double fall = score(2.0 * (s.cost + std::max(s.cost_change, 0.0))) - now;
    const double previous = m_previous_fall;
    m_previous_fall = fall;
    if (s.iteration < 3 || !(previous > 0.0)) return ceres::SOLVER_CONTINUE;
    const double r = fall / previous;
    const double behind = now - m_winner - 10.0;
    if (behind > 0.0 && r < 0.9 && 2.0 * fall * r / (1.0 - r) < behind) {
      settled = true;
      return ceres::SOLVER_TERMINATE_SUCCESSFULLY;
    }
    return ceres::SOLVER_CONTINUE;
  }
  bool settled = false;

 private:
  [[nodiscard]] double score(double rss) const {
    return m_criterion == Criterion::bic ? bic(rss, m_n, m_k) : aicc(rss, m_n, m_k);
  }
  int m_n, m_k;
  Criterion m_criterion;
  double m_winner;
  double m_previous_fall = 0.0;
};

// Limits of one attempt.
struct AttemptLimits {
  int max_iterations = 100;  // per stage
  double function_tolerance = 1e-12;
  double abandon_above_cost =
      std::numeric_limits<double>::infinity();  // best least-squares cost so far [signal unit^2]
  bool least_squares_stage = true;  // false: straight to the robust loss (a start that is already the solution)
  bool evaluate_only = false;       // no iterations: scored where it starts (an upper bound of a fit from there)
  // A runner-up's refit: stopped once settled more than 10 units behind this score (SettleCallback).
  std::optional<double> settle_behind_score;
};

// The loss as Ceres defines it: rho(s) of s = r^2 with rho' and rho'' (ceres::HuberLoss, ceres::CauchyLoss).
std::unique_ptr<ceres::LossFunction> make_loss(LossKind kind, double delta) {
  switch (kind) {
    case LossKind::huber:
      return std::make_unique<ceres::HuberLoss>(delta);
    case LossKind::cauchy:
      return std::make_unique<ceres::CauchyLoss>(delta);
    case LossKind::none:
      return std::make_unique<ceres::TrivialLoss>();
  }
  return std::make_unique<ceres::TrivialLoss>();
}

// rho, the reweighting factor w = rho'(r^2) = psi(r)/r, and psi'(r) = rho' + 2 r^2 rho'' at residual r.
struct LossAt {
  double rho = 0.0, weight = 1.0, psi_slope = 1.0;
};
LossAt loss_at(const ceres::LossFunction& loss, double r) {
  double v[3];
  loss.Evaluate(r * r, v);
  return {v[0], v[1], v[1] + 2.0 * r * r * v[2]};
}

// Fits a layout in two stages. First plain least squares from the start: it converges in a few iterations,
// where the robust loss, with most residuals far beyond its threshold at first, would crawl. Then, if any
// residual lies beyond the threshold, the robust loss in one more solve from there, each residual in its
// square-root form sign(r) sqrt(rho(r^2)) (detail::CurveCost): its minimum solves the robust normal
// equations sum psi(r_i) dr_i/dtheta = 0, the fixed point that iteratively reweighted least squares
// (Holland & Welsch, Commun. Stat. A6 (1977) 813) reaches in many solves. The score is the criterion on
// sum rho(r_i^2).
void solve_attempt(Attempt& a, const Prepared& p, const FitOptions& o, double delta, const AttemptLimits& lim);

Attempt run_attempt(Layout layout, const Prepared& p, const FitOptions& o, double delta, const AttemptLimits& lim) {
  Attempt a;
  a.layout = std::move(layout);
  const Layout& L = a.layout;
  const int k = L.free_count;
  const int n = static_cast<int>(p.obs.volume_mL.size());
  a.u.assign(static_cast<std::size_t>(k), 0.0);
  for (const auto& d : L.params) {
    if (d.index >= 0) a.u[static_cast<std::size_t>(d.index)] = d.initial / d.scale;
  }
  a.warm = std::make_unique<WarmStates>();
  if (k < 1 || k > detail::kMaxFree || n <= k + 2) {
    a.report.termination = "FAILURE: too few readings or parameters out of range";
    return a;
  }
  if (!initial_states(L, a.u, p.obs, *a.warm)) {
    a.report.termination = "FAILURE: the starting model could not be solved at every reading";
    return a;
  }
  solve_attempt(a, p, o, delta, lim);
  return a;
}

// Solves (or, with lim.least_squares_stage false, continues) an attempt whose u and warm states are set.
void solve_attempt(Attempt& a, const Prepared& p, const FitOptions& o, double delta, const AttemptLimits& lim) {
  const Layout& L = a.layout;
  const int k = L.free_count;
  const int n = static_cast<int>(p.obs.volume_mL.size());
  FitOptions limited = o;
  limited.max_iterations = lim.max_iterations;
  limited.function_tolerance = lim.function_tolerance;
  const std::unique_ptr<ceres::LossFunction> loss = make_loss(o.loss, delta);
  // A problem over a.u with the bounds, on a cost function it owns.
  auto solve_with = [&](const ceres::LossFunction* robust, ceres::IterationCallback* callback) {
    ceres::Problem problem;
    add_curve_block(problem, new detail::CurveCost(&a.layout, &p.obs, a.warm.get(), nullptr, robust), a.u);
    for (const auto& d : L.params) {
      if (d.index < 0) continue;
      problem.SetParameterLowerBound(a.u.data(), d.index, d.lower / d.scale);
      problem.SetParameterUpperBound(a.u.data(), d.index, d.upper / d.scale);
    }
    return detail::solve(problem, limited, callback);
  };
  std::vector<double> r(static_cast<std::size_t>(n), 0.0);
  const detail::CurveCost raw(&a.layout, &p.obs, a.warm.get());

  AbandonCallback abandon(lim.abandon_above_cost);
  if (lim.evaluate_only) {
    a.report.status = FitStatus::stopped;
    a.report.iterations = 0;
    a.report.termination = "NO_CONVERGENCE: scored at its starting values, not iterated";
  } else if (lim.least_squares_stage) {
    a.report = solve_with(nullptr, &abandon);
    a.least_squares_cost = a.report.cost;
  } else {
    a.report.status = FitStatus::converged;  // a start that is already (near) the solution
  }
  a.abandoned = abandon.abandoned;
  if (!lim.evaluate_only && a.report.status != FitStatus::failed && !a.abandoned && o.loss != LossKind::none) {
    // The robust stage, unless the least-squares solution is already its solution: every residual inside
    // the threshold, where rho is the square (a weight rho'(r^2) within 1e-5 of 1).
    bool needed = !lim.least_squares_stage;
    if (!needed) {
      if (!raw.residuals(a.u.data(), r.data())) {
        a.report.status = FitStatus::failed;
        a.report.termination = "FAILURE: the least-squares solution could not be evaluated";
      } else {
        for (double x : r) needed = needed || std::fabs(loss_at(*loss, x).weight - 1.0) > 1e-5;
      }
    }
    if (needed && a.report.status != FitStatus::failed) {
      const int before = lim.least_squares_stage ? a.report.iterations : 0;
      std::optional<SettleCallback> settle;
      if (lim.settle_behind_score) settle.emplace(n, k, o.criterion, *lim.settle_behind_score);
      a.report = solve_with(loss.get(), settle ? &*settle : nullptr);
      a.report.iterations += before;
      if (settle && settle->settled) {
        a.report.status = FitStatus::stopped;
        a.report.termination = "NO_CONVERGENCE: stopped once settled behind the winner";
      }
    }
  }
  if (a.abandoned) a.report.status = FitStatus::stopped;
  // sum rho at the final parameters (an abandoned candidate: at where it stopped, an upper bound).
  double rho = 0.0;
  if (raw.residuals(a.u.data(), r.data())) {
    for (double x : r) rho += loss_at(*loss, x).rho;
  } else {
    rho = std::numeric_limits<double>::infinity();
  }
  a.rho_sum = rho;
  a.report.cost = 0.5 * rho;
  if (!lim.least_squares_stage) a.least_squares_cost = 0.5 * rho;
  a.ok = a.report.status != FitStatus::failed && std::isfinite(a.rho_sum);
  if (a.ok) {
    const double rss = std::max(a.rho_sum, 1e-300);
    const int kk = k + 1;  // the residual variance counts as a parameter (Burnham & Anderson)
    a.score = n > kk + 1 ? (o.criterion == Criterion::bic ? bic(rss, n, kk) : aicc(rss, n, kk))
                         : std::numeric_limits<double>::infinity();
  }
}

Prepared prepare_inputs(const Curve& curve,
                        const FitInputs& in,
                        const std::vector<signal::Endpoint>& endpoints,
                        const std::vector<signal::GranEndpoint>& gran,
                        const FitOptions& o) {
  Prepared p;
  p.inputs = in;
  p.signal = curve.signal;
  p.temperature_C = in.temperature_C;
  p.nernst_mV = nernst_slope_mV(in.temperature_C);
  if (in.titrant != TitrantKind::unknown) {
    p.base_titrant = in.titrant == TitrantKind::base;
  } else {
    // pH rises with a base titrant; an electrode potential falls.
    p.base_titrant = curve.signal == SignalKind::ph ? curve.direction > 0 : curve.direction < 0;
  }
  const std::size_t n = curve.volume_mL.size();
  const std::size_t stride =
      n > static_cast<std::size_t>(o.max_points) ? (n + static_cast<std::size_t>(o.max_points) - 1) / o.max_points : 1;
  for (std::size_t i = 0; i < n; i += stride) {
    if (!std::isfinite(curve.volume_mL[i]) || !std::isfinite(curve.value[i])) continue;
    p.obs.volume_mL.push_back(curve.volume_mL[i]);
    p.obs.value.push_back(curve.value[i]);
  }
  if (!p.obs.volume_mL.empty()) {
    p.v_first = p.obs.volume_mL.front();
    p.v_last = p.obs.volume_mL.back();
  }
  const double floor = curve.signal == SignalKind::ph ? 1e-6 : 6e-5;
  p.noise = std::max({curve.noise_sd, curve.resolution / std::sqrt(12.0), floor});
  for (std::size_t i = 0; i < endpoints.size(); ++i) {
    p.endpoint_mL.push_back(endpoints[i].volume_mL);
    p.endpoint_snr.push_back(std::isfinite(endpoints[i].snr) && endpoints[i].snr > 0 ? endpoints[i].snr : 1.0);
    std::optional<double> g;
    if (i < gran.size() && gran[i].before && gran[i].before->function == signal::GranFunction::buffer &&
        gran[i].before->pKa && gran[i].before->linear)
      g = gran[i].before->pKa;
    p.gran_pKa.push_back(g);
  }
  // Keep them in volume order.
  std::vector<std::size_t> order(p.endpoint_mL.size());
  std::iota(order.begin(), order.end(), 0);
  std::sort(
      order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return p.endpoint_mL[a] < p.endpoint_mL[b]; });
  std::vector<double> ev, es;
  std::vector<std::optional<double>> gp;
  for (std::size_t i : order) {
    ev.push_back(p.endpoint_mL[i]);
    es.push_back(p.endpoint_snr[i]);
    gp.push_back(p.gran_pKa[i]);
  }
  p.endpoint_mL = std::move(ev);
  p.endpoint_snr = std::move(es);
  p.gran_pKa = std::move(gp);
  if (p.signal == SignalKind::mv && !p.endpoint_mL.empty()) {
    // Beyond the last endpoint the excess titrant alone sets the pH: [OH-] (or [H+]) = Ct (V - Veq) / (V0 + V),
    // whatever the sample held. E0 = E + s pH there (activity left out: a start, not a result).
    const double Veq = p.endpoint_mL.back();
    const double V0 = in.sample_volume_mL;
    const double Ct = in.titrant_conc_mol_L;
    const double pKw = chem::pKw(in.temperature_C);
    std::vector<double> e0;
    for (std::size_t i = 0; i < p.obs.volume_mL.size(); ++i) {
      const double v = p.obs.volume_mL[i];
      if (!(v > 1.1 * Veq)) continue;
      const double excess = Ct * (v - Veq) / (V0 + v);
      const double pH = p.base_titrant ? pKw + std::log10(excess) : -std::log10(excess);
      e0.push_back(p.obs.value[i] + p.nernst_mV * pH);
    }
    if (e0.size() >= 3) {
      std::nth_element(e0.begin(), e0.begin() + static_cast<long>(e0.size() / 2), e0.end());
      p.e0_guess_mV = e0[e0.size() / 2];
    }
  }
  return p;
}

// The candidates for a run: forced, or by titrant and endpoint count.
std::vector<ModelShape> candidates(const Prepared& p, const FitOptions& o) {
  std::vector<ModelShape> out;
  if (!o.model.empty()) {
    if (const auto k = model_kind_from_string(o.model)) {
      if (*k == ModelKind::analyte) throw InputError({"options", 0, 0}, "--model analyte: name the substance instead");
      if (is_acid_kind(*k) != p.base_titrant) {
        throw InputError({"options", 0, 0},
                         fmt::format("--model {}: an {} is titrated with {}, and this run's titrant is {}",
                                     o.model,
                                     is_acid_kind(*k) ? "acid" : "base",
                                     is_acid_kind(*k) ? "a base" : "an acid",
                                     p.base_titrant ? "a base" : "an acid"),
                         "check --titrant, or choose a model of the other kind");
      }
      out.push_back(detail::shape_of(*k));
      return out;
    }
    const chem::AnalyteInfo* info = chem::find_analyte(o.model);
    if (info == nullptr) {
      std::string kinds;
      for (ModelKind k : model_kinds()) kinds += (kinds.empty() ? "" : ", ") + std::string(to_string(k));
      throw InputError(
          {"options", 0, 0},
          fmt::format("--model '{}': neither a model kind nor a substance of the analyte table", o.model),
          "model kinds: " + kinds + "; or a substance such as KHP, acetic acid (veq simulate --help lists them)");
    }
    ModelShape s;
    s.kind = ModelKind::analyte;
    s.name = info->name;
    switch (info->kind) {
      case chem::AnalyteKind::strong_acid:
      case chem::AnalyteKind::strong_base:
        s.strong = true;
        break;
      case chem::AnalyteKind::weak:
        s.weak_steps = static_cast<int>(info->pKa_25C.size());
        s.top_charge = info->top_charge;
        s.added_form = info->added_form;
        for (std::size_t j = 0; j < info->pKa_25C.size(); ++j) {
          const double slope = j < info->dpKa_dT_per_K.size() ? info->dpKa_dT_per_K[j] : 0.0;
          s.table_pKa.push_back(info->pKa_25C[j] + slope * (p.temperature_C - constants::kStandardTemperatureC));
        }
        break;
    }
    const bool strong_fits =
        info->kind == chem::AnalyteKind::weak || (info->kind == chem::AnalyteKind::strong_acid) == p.base_titrant;
    if (!strong_fits || (s.weak_steps > 0 && titrated_steps(s, p.base_titrant).empty())) {
      throw InputError(
          {"options", 0, 0},
          fmt::format(
              "--model '{}': a {} titrant has nothing to titrate in it", info->name, p.base_titrant ? "base" : "acid"),
          "check --titrant");
    }
    out.push_back(s);
    return out;
  }
  const std::size_t m = p.endpoint_mL.size();
  std::vector<ModelKind> kinds;
  if (p.base_titrant) {
    if (m == 1)
      kinds = {ModelKind::strong_acid,
               ModelKind::weak_acid,
               ModelKind::acid_salt,
               ModelKind::diprotic_acid,
               ModelKind::triprotic_acid};
    else if (m == 2)
      kinds = {ModelKind::diprotic_acid, ModelKind::strong_weak_acid, ModelKind::triprotic_acid, ModelKind::weak_acid};
    else
      kinds = {ModelKind::triprotic_acid, ModelKind::diprotic_acid};
  } else {
    if (m == 1)
      kinds = {ModelKind::strong_base, ModelKind::weak_base, ModelKind::carbonate_base};
    else if (m == 2)
      kinds = {ModelKind::carbonate_base,
               ModelKind::hydroxide_carbonate,
               ModelKind::carbonate_bicarbonate,
               ModelKind::strong_weak_base,
               ModelKind::weak_base};
    else
      kinds = {ModelKind::hydroxide_carbonate, ModelKind::carbonate_base, ModelKind::carbonate_bicarbonate};
  }
  for (ModelKind k : kinds) out.push_back(detail::shape_of(k));
  return out;
}

// The equivalence volumes a start implies: the strong part's, then one per titrated weak step.
std::vector<double> start_volumes(const ModelShape& s, const std::vector<int>& steps, const Start& st, bool base) {
  std::vector<double> v;
  if (s.strong && (steps.empty() || s.kind != ModelKind::hydroxide_carbonate)) v.push_back(st.V_strong);
  for (double x : cumulative_volumes(s, steps, st, base)) v.push_back(x);
  return v;
}

// Starts worth trying for a shape. Every way of assigning endpoints to the model's equivalence points
// (V_strong = E_i, V_weak = E_i / k or E_j - E_i) is scored by the signal-to-noise ratios of the endpoints
// it explains (within 4 %); the best is tried, and up to two ties (one endpoint may be a first, a last or a
// middle step).
std::vector<Start> starts(const ModelShape& s, const Prepared& p) {
  const auto& E = p.endpoint_mL;
  const int nt = static_cast<int>(titrated_steps(s, p.base_titrant).size());
  std::vector<Start> cand;
  if (E.empty()) {
    // No endpoint (a forced model): the last equivalence point at 80 % of the run.
    const double v = 0.8 * p.v_last;
    Start st;
    if (s.strong && nt > 0) {
      st.V_strong = 0.5 * v;
      st.V_weak = 0.5 * v / nt;
    } else if (s.strong) {
      st.V_strong = v;
    } else {
      st.V_weak = v / std::max(nt, 1);
    }
    return {st};
  }
  const std::size_t m = E.size();
  if (s.strong && nt == 0) {
    for (double e : E) cand.push_back({e, 0.0});
  } else if (s.second_added_form >= 0) {
    // Carbonate and bicarbonate: E1 = V(CO3), E2 = 2 V(CO3) + V(HCO3).
    for (std::size_t i = 0; i < m; ++i) {
      for (std::size_t j = i + 1; j < m; ++j) cand.push_back({0.0, E[i], std::max(E[j] - 2.0 * E[i], 0.02 * E[j])});
    }
    for (double e : E) cand.push_back({0.0, 0.5 * e, 0.02 * e});
  } else if (!s.strong) {
    // An endpoint is most often the first step (well-separated pKa values) or the last (close ones,
    // as citric acid's, where only the last jump shows): those two first, the steps between after.
    for (double e : E) {
      cand.push_back({0.0, e});
      if (nt > 1) cand.push_back({0.0, e / nt});
      for (int k = 2; k < nt; ++k) cand.push_back({0.0, e / k});
    }
  } else {
    for (std::size_t i = 0; i < m; ++i) {
      for (std::size_t j = i + 1; j < m; ++j) {
        if (s.kind == ModelKind::hydroxide_carbonate) {
          // The hydroxide and the carbonate's first step share the first endpoint.
          const double w = E[j] - E[i];
          if (E[i] - w > 0.02 * E[i]) cand.push_back({E[i] - w, w});
          cand.push_back({0.02 * E[i], E[i]});
        } else {
          cand.push_back({E[i], (E[j] - E[i]) / nt});
        }
      }
      cand.push_back({0.5 * E[i], 0.5 * E[i] / nt});  // both parts behind one endpoint
    }
  }
  std::vector<std::pair<double, Start>> scored;
  for (const Start& st : cand) {
    if (!(st.V_strong >= 0.0) || !(st.V_weak >= 0.0) || (st.V_strong <= 0.0 && st.V_weak <= 0.0)) continue;
    double score = 0.0;
    const std::vector<double> veq = start_volumes(s, titrated_steps(s, p.base_titrant), st, p.base_titrant);
    for (std::size_t i = 0; i < m; ++i) {
      for (double v : veq) {
        if (std::fabs(E[i] - v) <= 0.04 * v) {
          score += p.endpoint_snr[i];
          break;
        }
      }
    }
    scored.push_back({score, st});
  }
  std::stable_sort(scored.begin(), scored.end(), [](const auto& x, const auto& y) { return x.first > y.first; });
  std::vector<Start> out;
  for (const auto& scored_start : scored) {
    const double score = scored_start.first;
    const Start& st = scored_start.second;
    if (out.size() == 3 || score < 0.999 * scored.front().first) break;
    const bool same = std::any_of(out.begin(), out.end(), [&](const Start& o) {
      return std::fabs(o.V_strong - st.V_strong) <= 0.05 * std::max(o.V_strong, 1e-9) &&
             std::fabs(o.V_weak - st.V_weak) <= 0.05 * std::max(o.V_weak, 1e-9) &&
             std::fabs(o.V_second - st.V_second) <= 0.05 * std::max(o.V_second, 1e-9);
    });
    if (!same) out.push_back(st);
  }
  return out;
}

// The full summary of the chosen attempt: residuals, covariance, intervals, equivalence volumes, flags.
FitSummary summarise(
    Attempt& a, const Prepared& p, const FitOptions& o, double delta, const std::vector<signal::Endpoint>& endpoints) {
  FitSummary s;
  const Layout& L = a.layout;
  const int k = L.free_count;
  const int n = static_cast<int>(p.obs.volume_mL.size());
  s.model = L.shape.name;
  s.kind = L.shape.kind;
  s.status = a.report.status;
  s.termination = a.report.termination;
  s.iterations = a.report.iterations;
  s.solver = {
      a.warm->evaluations, a.warm->jacobian_evaluations, a.warm->solves, a.warm->newton_evaluations, a.warm->fallbacks};
  s.points = n;
  s.free_parameters = k;
  s.cost = a.report.cost;
  s.score = a.score;
  s.signal = p.signal;

  // Raw residuals at the solution.
  std::vector<double> r(static_cast<std::size_t>(n), 0.0);
  const detail::CurveCost raw(&a.layout, &p.obs, a.warm.get());
  bool have_residuals = raw.residuals(a.u.data(), r.data());
  double rss = 0.0;
  for (double x : r) rss += x * x;
  if (!have_residuals || !std::isfinite(rss)) {
    s.status = FitStatus::failed;
    s.flags.emplace_back(kFlagFailed);
    std::fill(r.begin(), r.end(), 0.0);
    rss = 0.0;
  }
  const int dof = n - k;
  s.residual_sd = dof > 0 ? std::sqrt(rss / dof) : 0.0;
  s.aicc = rss > 0 && n > k + 2 ? aicc(std::max(a.rho_sum, 1e-300), n, k + 1) : 0.0;
  s.bic = rss > 0 ? bic(std::max(a.rho_sum, 1e-300), n, k + 1) : 0.0;
  if (!std::isfinite(s.aicc)) s.aicc = 0.0;
  if (!std::isfinite(s.bic)) s.bic = 0.0;
  if (!std::isfinite(s.score)) s.score = 0.0;
  s.residuals = r;
  s.residual_volumes_mL = p.obs.volume_mL;
  s.model_values.resize(r.size());
  for (std::size_t i = 0; i < r.size(); ++i) s.model_values[i] = p.obs.value[i] - r[i];

  // M-estimate scale (Huber 1981, §7.6; from memory): s^2 = K^2 [sum psi^2 / (n - p)] / [mean psi']^2,
  // K = 1 + (p/n) var(psi') / mean(psi')^2. Equals RSS / (n - p) for least squares.
  double sum_psi2 = 0.0, sum_d = 0.0, sum_d2 = 0.0;
  const std::unique_ptr<ceres::LossFunction> loss = make_loss(o.loss, delta);
  for (double x : r) {
    const LossAt l = loss_at(*loss, x);
    const double v = l.weight * x;  // psi(r)
    const double d = l.psi_slope;
    sum_psi2 += v * v;
    sum_d += d;
    sum_d2 += d * d;
  }
  const double mean_d = sum_d / n;
  const double var_d = std::max(sum_d2 / n - mean_d * mean_d, 0.0);
  double scale2 = 0.0;
  if (dof > 0 && mean_d > 0.05) {
    const double K = 1.0 + (static_cast<double>(k) / n) * var_d / (mean_d * mean_d);
    scale2 = K * K * (sum_psi2 / dof) / (mean_d * mean_d);
  } else if (dof > 0) {
    scale2 = rss / dof;
  }
  s.scale_sd = std::sqrt(scale2);

  // Covariance in the scaled parameters, then in the parameters' own units.
  std::optional<Eigen::MatrixXd> cov;
  if (have_residuals && k > 0 && dof > 0) {
    // The Jacobian of the raw residuals at the solution (the states are already there: no re-solve; the
    // residuals it also writes are those above).
    Eigen::Matrix<double, Eigen::Dynamic, Eigen::Dynamic, Eigen::RowMajor> jac(n, k);
    std::vector<double> residuals_again(static_cast<std::size_t>(n), 0.0);
    const double* block = a.u.data();
    double* jac_rows = jac.data();
    if (raw.Evaluate(&block, residuals_again.data(), &jac_rows))
      cov = detail::unscaled_covariance(Eigen::MatrixXd(jac));
  }
  if (!cov) s.flags.emplace_back(kFlagCovarianceFailed);
  const double t = t_quantile_975(std::max(dof, 1));
  std::vector<double> se_u(static_cast<std::size_t>(k), 0.0);
  for (const ParamDef& d : L.params) {
    Parameter q;
    q.name = d.name;
    q.unit = d.unit;
    q.value = L.value(d, a.u.data());
    q.fixed = d.index < 0;
    q.lower_bound = d.lower;
    q.upper_bound = d.upper;
    if (!q.fixed && cov) {
      const double var_u = (*cov)(d.index, d.index) * scale2;
      if (var_u >= 0.0 && std::isfinite(var_u)) {
        se_u[static_cast<std::size_t>(d.index)] = std::sqrt(var_u);
        q.std_error = std::sqrt(var_u) * d.scale;
        q.ci95_low = q.value - t * *q.std_error;
        q.ci95_high = q.value + t * *q.std_error;
      }
    }
    if (!q.fixed) {
      const double range = d.upper - d.lower;
      if (q.value - d.lower <= 1e-6 * range || d.upper - q.value <= 1e-6 * range) {
        if (std::find(s.flags.begin(), s.flags.end(), kFlagAtBound) == s.flags.end())
          s.flags.emplace_back(kFlagAtBound);
      }
    }
    s.parameters.push_back(q);
  }
  if (cov) {
    for (const ParamDef& d : L.params) {
      if (d.index >= 0) s.correlation_names.push_back(d.name);
    }
    s.correlation.assign(static_cast<std::size_t>(k), std::vector<double>(static_cast<std::size_t>(k), 0.0));
    for (int i = 0; i < k; ++i) {
      for (int j = 0; j < k; ++j) {
        const double den = std::sqrt((*cov)(i, i) * (*cov)(j, j));
        double c = den > 0.0 ? (*cov)(i, j) / den : (i == j ? 1.0 : 0.0);
        if (!std::isfinite(c)) c = 0.0;
        s.correlation[static_cast<std::size_t>(i)][static_cast<std::size_t>(j)] = std::clamp(c, -1.0, 1.0);
      }
    }
  }

  // Equivalence volumes and their propagated uncertainty (central differences in u).
  const std::vector<double> veq = equivalence_volumes(L, a.u.data(), p.base_titrant);
  std::vector<std::vector<double>> grad(veq.size(), std::vector<double>(static_cast<std::size_t>(k), 0.0));
  for (int i = 0; i < k && cov; ++i) {
    std::vector<double> up = a.u, dn = a.u;
    const double h = 1e-6 * std::max(1.0, std::fabs(a.u[static_cast<std::size_t>(i)]));
    up[static_cast<std::size_t>(i)] += h;
    dn[static_cast<std::size_t>(i)] -= h;
    const auto vu = equivalence_volumes(L, up.data(), p.base_titrant);
    const auto vd = equivalence_volumes(L, dn.data(), p.base_titrant);
    for (std::size_t e = 0; e < veq.size(); ++e) grad[e][static_cast<std::size_t>(i)] = (vu[e] - vd[e]) / (2.0 * h);
  }
  const double margin = 1e-9 + 1e-6 * std::fabs(p.v_last);
  for (std::size_t e = 0; e < veq.size(); ++e) {
    FittedEquivalence fe;
    fe.volume_mL = veq[e];
    if (cov) {
      double var = 0.0;
      for (int i = 0; i < k; ++i) {
        for (int j = 0; j < k; ++j)
          var += grad[e][static_cast<std::size_t>(i)] * (*cov)(i, j) * scale2 * grad[e][static_cast<std::size_t>(j)];
      }
      if (var >= 0.0 && std::isfinite(var)) fe.uncertainty_mL = std::sqrt(var);
    }
    fe.in_range =
        std::isfinite(fe.volume_mL) && fe.volume_mL >= p.v_first - margin && fe.volume_mL <= p.v_last + margin;
    if (!std::isfinite(fe.volume_mL)) continue;
    s.equivalence.push_back(fe);
  }
  // Match each endpoint to the nearest fitted equivalence point within max(3 %, 3 combined SDs).
  std::vector<bool> taken(s.equivalence.size(), false);
  for (const auto& ep : endpoints) {
    int best = -1;
    double best_d = std::numeric_limits<double>::infinity();
    for (std::size_t e = 0; e < s.equivalence.size(); ++e) {
      if (taken[e] || !s.equivalence[e].in_range) continue;
      const double d = std::fabs(s.equivalence[e].volume_mL - ep.volume_mL);
      const double tol = std::max(0.03 * s.equivalence[e].volume_mL,
                                  3.0 * std::hypot(ep.uncertainty_mL, s.equivalence[e].uncertainty_mL.value_or(0.0)));
      if (d <= tol && d < best_d) {
        best = static_cast<int>(e);
        best_d = d;
      }
    }
    if (best >= 0) {
      taken[static_cast<std::size_t>(best)] = true;
      s.equivalence[static_cast<std::size_t>(best)].endpoint_index = ep.index;
    }
  }

  // Checks.
  if (s.status == FitStatus::stopped) s.flags.emplace_back(kFlagNotConverged);
  s.residual_tests = residual_tests(r);
  if (s.scale_sd < 0.1 * p.noise) s.residual_tests.runs_tested = false;  // below the reading noise: nothing to test
  if (s.residual_tests.runs_tested && s.residual_tests.runs_p < o.runs_test_alpha)
    s.flags.emplace_back(kFlagResidualPattern);
  if (s.scale_sd > o.max_residual_ratio * p.noise) s.flags.emplace_back(kFlagPoorFit);
  s.chemistry = L.model(a.u.data());
  return s;
}

// Whether a free parameter of an attempt ended on (within 1e-6 of the range of) its bound.
bool at_bound(const Attempt& a) {
  for (const ParamDef& d : a.layout.params) {
    if (d.index < 0) continue;
    const double v = a.layout.value(d, a.u.data());
    const double range = d.upper - d.lower;
    if (v - d.lower <= 1e-6 * range || d.upper - v <= 1e-6 * range) return true;
  }
  return false;
}

// The least spacing of two titrated steps that the curve tells from one step: the largest spacing of
// equal, independent sites, log10 4 (two sites), plus 0.3. For n such sites of one constant k the
// macroscopic constants are K_j = k (n - j + 1) / j, so pKa_(j+1) - pKa_j = log10[(n - j + 1)(j + 1) /
// (j (n - j))] (log10 4 for two sites, log10 3 for three, less for more): the mean number of protons bound
// is then n h / (h + k), and in an ideal solution the n steps at c / n titrate exactly as one step at c (the
// statistical factor of polyprotic acids; e.g. Adams, J. Am. Chem. Soc. 38 (1916) 1503, from memory). One
// spacing for all: a triprotic candidate whose third step lies near the readings' end titrates its first
// two as a pair. Just above log10 4 a diprotic candidate differs from one step by a few hundredths of a pH
// (0.2 above it: 0.07 pH at most, "Model selection" in DEVELOPERS.md), as much as activity or junction
// effects alter a curve, so it fits those and halves or thirds the concentration.
constexpr double kMergedSpacing = 0.60206 + 0.3;

// Whether two titrated steps of a candidate are merged (closer than kMergedSpacing).
bool merged_steps(const Attempt& a, bool base_titrant) {
  const ModelShape& s = a.layout.shape;
  if (s.weak_steps < 2 || a.u.empty()) return false;
  const std::vector<int> steps = titrated_steps(s, base_titrant);
  if (steps.size() < 2) return false;
  const chem::Model<double> m = a.layout.model(a.u.data());
  if (m.protolytes.empty()) return false;
  const auto& pKa = m.protolytes.front().pKa;
  const int lo = *std::min_element(steps.begin(), steps.end());
  const int hi = *std::max_element(steps.begin(), steps.end());
  for (int j = lo; j < hi; ++j) {
    const double gap = pKa[static_cast<std::size_t>(j + 1)] - pKa[static_cast<std::size_t>(j)];
    if (gap < kMergedSpacing) return true;
  }
  return false;
}

// Whether a titrated step of a candidate is out of the readings' reach: its pKa more than 2 below the
// lowest fitted pH or more than 2 above the highest, so that at every reading 99 % of the step is in one
// form (Henderson-Hasselbalch: the ratio of the two forms is 10^(pH - pKa)). To the curve such a step is a
// strong acid or base, or no step at all, which a simpler candidate says with fewer parameters.
bool step_out_of_reach(const Attempt& a, bool base_titrant) {
  const ModelShape& s = a.layout.shape;
  if (s.weak_steps < 1 || a.u.empty() || !a.warm || a.warm->state.empty()) return false;
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (const chem::Equilibrium& e : a.warm->state) {
    lo = std::min(lo, e.pH());
    hi = std::max(hi, e.pH());
  }
  if (!std::isfinite(lo) || !std::isfinite(hi)) return false;
  const chem::Model<double> m = a.layout.model(a.u.data());
  if (m.protolytes.empty()) return false;
  const auto& pKa = m.protolytes.front().pKa;
  for (int j : titrated_steps(s, base_titrant)) {
    const double k = pKa[static_cast<std::size_t>(j)];
    if (k < lo - 2.0 || k > hi + 2.0) return true;
  }
  return false;
}

// The layout of shape started from a fitted simpler candidate: shared parameters at its values, the added
// top pKa beyond the readings (as for a step the readings do not reach).
Layout seeded_layout(const ModelShape& shape, const Attempt& parent, const Prepared& p, const FitOptions& o) {
  const Layout& P = parent.layout;
  Start st;
  const std::vector<double> veq = equivalence_volumes(P, parent.u.data(), p.base_titrant);
  st.V_strong = P.shape.strong && !veq.empty() ? veq.front() : 0.0;
  const double cw = P.shape.weak_steps > 0 ? P.model(parent.u.data()).protolytes[0].conc_mol_L : 0.0;
  st.V_weak = p.inputs.sample_volume_mL * cw / p.inputs.titrant_conc_mol_L;
  Layout L = make_layout(shape, p, o, st);
  double top = -1e300;
  for (ParamDef& d : L.params) {
    for (const ParamDef& q : P.params) {
      if (q.name == d.name && d.index >= 0) d.initial = std::clamp(P.value(q, parent.u.data()), d.lower, d.upper);
    }
    if (d.role == Role::pKa && d.step < P.shape.weak_steps) top = std::max(top, d.initial);
  }
  const double end_pH = reading_as_pH(p, p.obs.value.back(), p.e0_guess_mV.value_or(0.0));
  for (ParamDef& d : L.params) {
    if (d.role == Role::pKa && d.step == shape.weak_steps - 1 && d.index >= 0) {
      d.initial = std::clamp(std::max(end_pH + 3.0, top + 1.0), d.lower, d.upper);
    }
  }
  return L;
}

}  // namespace

FitResult fit_titration(const Curve& curve,
                        const FitInputs& inputs,
                        const std::vector<signal::Endpoint>& endpoints,
                        const std::vector<signal::GranEndpoint>& gran,
                        const FitOptions& options) {
  if (const auto problems = options.validate(); !problems.empty())
    throw InputError({"options", 0, 0}, problems.front());
  FitResult result;
  result.criterion = options.criterion;
  auto skip = [&](const std::string& why) {
    result.status = FitStatus::not_run;
    result.message = why;
    result.flags = {kFlagSkipped};
    result.warnings.push_back({"fit_skipped", "no charge-balance fit: " + why, {}});
    return result;
  };
  if (!options.enabled) {
    result.message = "disabled";
    result.flags = {kFlagSkipped};
    return result;
  }
  if (!(inputs.sample_volume_mL > 0.0) || !(inputs.titrant_conc_mol_L > 0.0) ||
      !std::isfinite(inputs.sample_volume_mL) || !std::isfinite(inputs.titrant_conc_mol_L)) {
    return skip(
        "it needs the sample volume and the titrant concentration (--sample-volume, --titrant-conc or the file's "
        "metadata)");
  }
  const Prepared p = prepare_inputs(curve, inputs, endpoints, gran, options);
  if (p.obs.volume_mL.size() < 12)
    return skip(fmt::format("{} readings are too few (at least 12)", p.obs.volume_mL.size()));
  if (options.fit_carbonate && !p.base_titrant) {
    result.warnings.push_back(
        {"fit_carbonate_ignored", "--fit-carbonate: only a base titrant absorbs CO2; not fitted", {}});
  }
  const std::vector<ModelShape> shapes = candidates(p, options);  // throws for a bad --model
  if (options.model.empty() && p.endpoint_mL.empty()) {
    return skip("no endpoint to start from (name the model with --model to fit anyway)");
  }
  FitOptions o = options;
  // A known amount pins the concentration only together with the titrant factor: without it, the titrant
  // is taken at its nominal concentration and the concentration is what the fit measures.
  if (!o.fit_titer) o.standard_amount_mmol.reset();
  if (o.fit_titer && !o.standard_amount_mmol) {
    o.fit_titer = false;
    result.warnings.push_back({"fit_titer_ignored",
                               "--fit-titer: the titrant factor needs the amount of the standard (a standardisation "
                               "method with the standard's mass and molar mass); the factor stays 1",
                               {}});
  }
  const double delta = o.loss_scale * p.noise;
  const bool selecting = shapes.size() > 1;
  // Screening: with several candidates, they are fitted to an even thinning of the readings (every k-th by
  // index, FitOptions::screen_points of them): a candidate's cost is proportional to the readings, and ranking
  // models needs far fewer than measuring the chosen one. The two best are then fitted to all readings
  // from their screening solutions, and all the readings decide between them (DEVELOPERS.md, "Model
  // selection").
  const std::size_t n_all = p.obs.volume_mL.size();
  const bool screening = selecting && o.screen_points > 0 && n_all > 3 * static_cast<std::size_t>(o.screen_points) / 2;
  Prepared thinned;
  if (screening) {
    thinned = p;
    const auto m = static_cast<std::size_t>(o.screen_points);
    thinned.obs.volume_mL.clear();
    thinned.obs.value.clear();
    for (std::size_t j = 0; j < m; ++j) {
      const std::size_t i = (j * (n_all - 1) + (m - 1) / 2) / (m - 1);
      thinned.obs.volume_mL.push_back(p.obs.volume_mL[i]);
      thinned.obs.value.push_back(p.obs.value[i]);
    }
  }
  const Prepared& ps = screening ? thinned : p;

  // Candidates get fewer iterations and a looser cost tolerance than a forced model (a wrong model need not
  // converge to lose), and one still 8 times the best least-squares cost after 2 iterations is abandoned:
  // its criterion would then be worse by more than n ln 8.
  // The cost tolerance of a candidate, 0.02/n, leaves its criterion within about n x 0.02 x (a few) < 1 of
  // its converged value: far below the differences (>= 2) that decide.
  AttemptLimits candidate_limits;
  const double n_points = static_cast<double>(ps.obs.volume_mL.size());
  candidate_limits.max_iterations = selecting ? std::min(o.max_iterations, 8) : o.max_iterations;
  candidate_limits.function_tolerance =
      selecting ? std::max(o.function_tolerance, 0.02 / n_points) : o.function_tolerance;
  double best_ls = std::numeric_limits<double>::infinity();
  std::optional<InputError> hold_error;
  std::vector<Attempt> best_per_shape;
  for (const ModelShape& shape : shapes) {
    Attempt best;
    // A candidate that adds one weak step to a simpler candidate that already describes the readings
    // (residual SD within twice the noise) starts from that fit, the new step's pKa beyond the readings:
    // it then only has to show whether the extra step helps.
    const Attempt* parent = nullptr;
    for (const Attempt& q : best_per_shape) {
      const double n_free = std::max(1.0, n_points - q.layout.free_count);
      if (q.ok && !q.abandoned && q.layout.shape.strong == shape.strong && q.layout.shape.added_form == 0 &&
          shape.added_form == 0 && q.layout.shape.weak_steps + 1 == shape.weak_steps &&
          std::sqrt(2.0 * q.least_squares_cost / n_free) <= 2.0 * p.noise)
        parent = &q;
    }
    std::vector<std::optional<Start>> plan;
    if (parent != nullptr)
      plan.push_back(std::nullopt);
    else
      for (const Start& st : starts(shape, ps)) plan.push_back(st);
    for (const auto& st : plan) {
      AttemptLimits lim = candidate_limits;
      if (selecting) lim.abandon_above_cost = best_ls;
      Layout layout;
      try {
        layout = st ? make_layout(shape, ps, o, *st) : seeded_layout(shape, *parent, ps, o);
      } catch (const InputError& e) {
        // A held parameter this candidate lacks: in a selection the candidate is left out; alone, an error.
        if (!selecting) throw;
        hold_error = e;
        break;
      }
      Attempt a = run_attempt(std::move(layout), ps, o, delta, lim);
      if (a.ok && !a.abandoned) best_ls = std::min(best_ls, a.least_squares_cost);
      if (a.ok && (!best.ok || a.rho_sum < best.rho_sum))
        best = std::move(a);
      else if (!best.ok && best.layout.params.empty())
        best = std::move(a);
    }
    best_per_shape.push_back(std::move(best));
  }
  for (const Attempt& a : best_per_shape) {
    ModelScore ms;
    ms.model = a.layout.shape.name;
    ms.score = std::isfinite(a.score) ? a.score : 0.0;
    ms.converged = a.ok && a.report.status == FitStatus::converged;
    ms.free_parameters = a.layout.free_count;
    ms.residual_sd =
        a.ok ? std::sqrt(std::max(a.rho_sum, 0.0) /
                         std::max<double>(1.0, static_cast<double>(ps.obs.volume_mL.size()) - a.layout.free_count))
             : 0.0;
    ms.readings = static_cast<int>(ps.obs.volume_mL.size());
    if (a.ok) result.candidates.push_back(ms);
  }
  std::sort(result.candidates.begin(), result.candidates.end(), [](const ModelScore& x, const ModelScore& y) {
    return x.score < y.score;
  });
  // The best score wins, except that a candidate with a free parameter on its bound (a component driven
  // to nothing, a pKa pushed out of reach) gives way to one without: the simpler model then says the same.
  // So does one with two titrated steps merged (merged_steps): to the curve they are one step, and such a
  // candidate wins only by fitting what the model leaves out (activity, the junction, a settling first
  // reading), at a half or a third of the concentration. And one with a titrated step out of the readings'
  // reach (step_out_of_reach): the simpler model without that step's pKa says the same.
  // The best by that rule, leaving out one index (none: size()); size() when there is none.
  // Why the rule passes a candidate over ("" for none), as ModelScore::set_aside reports it.
  auto set_aside_reason = [&](const Attempt& q) -> std::string {
    if (at_bound(q)) return "parameter_at_bound";
    if (merged_steps(q, p.base_titrant)) return "steps_merged";
    if (step_out_of_reach(q, p.base_titrant)) return "step_out_of_reach";
    return {};
  };
  auto fine = [&](const Attempt& q) { return set_aside_reason(q).empty(); };
  auto best_by_rule = [&](std::size_t except) {
    std::size_t best = best_per_shape.size();
    for (const bool allow_bound : {false, true}) {
      for (std::size_t i = 0; i < best_per_shape.size(); ++i) {
        const Attempt& q = best_per_shape[i];
        if (i == except || !q.ok || q.abandoned || (!allow_bound && !fine(q))) continue;
        if (best == best_per_shape.size() || q.score < best_per_shape[best].score) best = i;
      }
      if (best != best_per_shape.size()) break;
    }
    return best;
  };
  std::size_t chosen = best_by_rule(best_per_shape.size());
  if (chosen == best_per_shape.size() && hold_error &&
      std::none_of(
          best_per_shape.begin(), best_per_shape.end(), [](const Attempt& q) { return !q.layout.params.empty(); })) {
    throw *hold_error;  // no candidate has the held parameter
  }
  if (chosen == best_per_shape.size()) {
    result.status = FitStatus::failed;
    result.flags = {kFlagFailed};
    const std::string why =
        best_per_shape.empty() ? std::string("no candidate model") : best_per_shape.front().report.termination;
    result.message = "no candidate model could be fitted (" + why + ")";
    result.warnings.push_back({"fit_failed", "charge-balance fit failed: " + result.message, {}});
    return result;
  }
  bool polished = false;  // the winner was already solved to the full tolerances
  if (screening) {
    const std::size_t screened_winner = chosen;
    // The screening's best two (by the same rule), fitted again to every reading from where they stopped.
    // When every other candidate was abandoned, the best of those is the second: it gets the brief refit
    // below, so that the report still names a runner-up compared on every reading.
    std::size_t second = best_by_rule(chosen);
    if (second == best_per_shape.size()) {
      for (std::size_t i = 0; i < best_per_shape.size(); ++i) {
        const Attempt& q = best_per_shape[i];
        if (i == chosen || !q.ok || !q.abandoned) continue;
        if (second == best_per_shape.size() || q.score < best_per_shape[second].score) second = i;
      }
    }
    // A candidate's entry after its refit on every reading.
    auto rescore = [&](const Attempt& a) {
      for (auto& c : result.candidates) {
        if (c.model != a.layout.shape.name) continue;
        c.score = std::isfinite(a.score) ? a.score : 0.0;
        c.converged = a.ok && a.report.status == FitStatus::converged;
        c.readings = static_cast<int>(n_all);
        c.residual_sd = a.ok ? std::sqrt(std::max(a.rho_sum, 0.0) /
                                         std::max<double>(1.0, static_cast<double>(n_all) - a.layout.free_count))
                             : 0.0;
      }
    };
    // How far the runner-up trailed on the screening's readings (before the winner is refitted).
    const double screening_gap =
        second != best_per_shape.size() ? best_per_shape[second].score - best_per_shape[chosen].score : 0.0;
    AttemptLimits again = candidate_limits;
    again.function_tolerance = std::max(o.function_tolerance, 0.02 / static_cast<double>(n_all));
    again.least_squares_stage = false;
    for (const std::size_t i : {chosen, second}) {
      if (i == best_per_shape.size()) continue;
      Attempt& q = best_per_shape[i];
      Layout L = q.layout;
      for (ParamDef& d : L.params) {
        if (d.index >= 0) d.initial = std::clamp(q.layout.value(d, q.u.data()), d.lower, d.upper);
      }
      // The runner-up's score can only fall with more iterations, so its refit stops early only once it has
      // settled behind the winner: from its third iteration, more than 10 units behind, its falls in score
      // shrinking, and their geometric rest short of the gap (SettleCallback). It otherwise gets the
      // winner's iteration limit, since it may take the lead. (Stopping every runner-up 10 units behind
      // after 3 iterations let a weak acid restarted far from its all-readings solution, its trust region
      // still shrinking, lose to an over-parameterised model by 200 units.)
      if (i == second && best_per_shape[chosen].ok) {
        // A runner-up that converged on the screening's n readings and still trailed by more than n ln 8
        // there (its cost 8 times the winner's, the bound that abandons a candidate) is only scored on all
        // the readings at its screening solution, not refitted: that score is an upper bound of its own. One
        // that stopped unconverged is refitted as below: it may still be on its way (DEVELOPERS.md, "Model
        // selection").
        if (screening_gap > n_points * std::log(8.0) && q.report.status == FitStatus::converged) {
          AttemptLimits at_start = again;
          at_start.evaluate_only = true;
          Attempt scored = run_attempt(L, p, o, delta, at_start);
          if (scored.ok) {
            rescore(scored);
            q = std::move(scored);
            continue;
          }
        }
        // Refitted with the winner's iteration limit, stopped once it has settled behind the winner.
        AttemptLimits on = again;
        on.max_iterations = o.max_iterations;
        on.settle_behind_score = best_per_shape[chosen].score;
        Attempt refit = run_attempt(L, p, o, delta, on);
        if (refit.ok) {
          rescore(refit);
          q = std::move(refit);
          continue;
        }
      }
      // The screening's winner straight to the full limits and tolerances (it is most often the final
      // winner; should the runner-up take over, that one is polished below).
      AttemptLimits lim = again;
      if (i == chosen) {
        lim.max_iterations = o.max_iterations;
        lim.function_tolerance = o.function_tolerance;
      }
      Attempt full = run_attempt(std::move(L), p, o, delta, lim);
      rescore(full);
      q = std::move(full);
    }
    // All the readings decide between the two (a bound again gives way).
    if (second != best_per_shape.size()) {
      const Attempt& a = best_per_shape[chosen];
      const Attempt& b = best_per_shape[second];
      const bool a_fine = a.ok && fine(a), b_fine = b.ok && fine(b);
      if ((b_fine && !a_fine) || (b.ok && b_fine == a_fine && b.score < a.score) || (!a.ok && b.ok)) chosen = second;
    }
    polished = chosen == screened_winner;
    if (!best_per_shape[chosen].ok) {
      result.status = FitStatus::failed;
      result.flags = {kFlagFailed};
      result.message =
          "no candidate model could be fitted to all the readings (" + best_per_shape[chosen].report.termination + ")";
      result.warnings.push_back({"fit_failed", "charge-balance fit failed: " + result.message, {}});
      return result;
    }
    // The two refitted first (they are compared on the same readings), then the screened rest.
    std::stable_sort(result.candidates.begin(), result.candidates.end(), [&](const ModelScore& x, const ModelScore& y) {
      if ((x.readings == static_cast<int>(n_all)) != (y.readings == static_cast<int>(n_all)))
        return x.readings == static_cast<int>(n_all);
      return x.score < y.score;
    });
  }
  Attempt& win = best_per_shape[chosen];
  if (selecting && !polished) {
    // The winner is polished from where it stopped, with the full limits and tolerances (its warm states
    // are where it stopped too).
    const std::vector<double> u_before = win.u;
    const detail::SolveReport report_before = win.report;
    const double rho_before = win.rho_sum;
    const double score_before = win.score;
    AttemptLimits full;
    full.max_iterations = o.max_iterations;
    full.function_tolerance = o.function_tolerance;
    full.least_squares_stage = false;
    solve_attempt(win, p, o, delta, full);
    // Kept unless it ended worse (the two stop at their own tolerances: a difference of 1e-9 is neither).
    if (win.ok && win.rho_sum <= rho_before * (1.0 + 1e-9)) {
      for (auto& c : result.candidates) {
        if (c.model == win.layout.shape.name) c.score = win.score;
      }
      const int n_full = static_cast<int>(n_all);
      std::stable_sort(
          result.candidates.begin(), result.candidates.end(), [n_full](const ModelScore& x, const ModelScore& y) {
            if ((x.readings == n_full) != (y.readings == n_full)) return x.readings == n_full;
            return x.score < y.score;
          });
    } else {
      win.u = u_before;
      win.report = report_before;
      win.rho_sum = rho_before;
      win.score = score_before;
      win.ok = true;
    }
  }
  FitSummary summary = summarise(win, p, o, delta, endpoints);
  // A model named or left alone whose fitted steps merged (a fitted pKa among them).
  if (merged_steps(win, p.base_titrant) &&
      std::any_of(win.layout.params.begin(), win.layout.params.end(), [](const ParamDef& d) {
        return d.role == Role::pKa && d.index >= 0;
      }))
    summary.flags.emplace_back(kFlagStepsMerged);
  // Why the rule passes a candidate over, whatever its score; the chosen model first, the others as sorted.
  for (ModelScore& c : result.candidates) {
    for (const Attempt& q : best_per_shape) {
      if (!q.ok || q.layout.shape.name != c.model) continue;
      c.set_aside = set_aside_reason(q);
    }
  }
  std::stable_partition(result.candidates.begin(), result.candidates.end(), [&](const ModelScore& c) {
    return c.model == win.layout.shape.name;
  });
  // The runner-up: the next on the same readings. Within 2 units and not set aside, the choice is ambiguous
  // (one set aside with a better score is reported as such: the rule, not the score, decided).
  if (result.candidates.size() > 1 && result.candidates[1].readings == result.candidates[0].readings) {
    result.runner_up = result.candidates[1];
    if (result.candidates[1].set_aside.empty() && result.candidates[1].score - result.candidates[0].score < 2.0)
      summary.flags.emplace_back(kFlagAmbiguous);
  }
  result.status = summary.status;
  result.best = std::move(summary);
  const FitSummary& b = *result.best;
  if (!b.usable()) {
    std::string fl;
    for (const auto& f : b.flags) fl += (fl.empty() ? "" : ", ") + f;
    result.warnings.push_back({"fit_not_usable",
                               fmt::format("charge-balance fit ({}) is not used beside the endpoints: {}",
                                           b.model,
                                           fl.empty() ? std::string(to_string(b.status)) : fl),
                               {}});
  }
  return result;
}

indicators::PhCurve fitted_curve(const FitSummary& fit, const Curve& curve) {
  indicators::PhCurve c;
  auto titration = std::make_shared<const chem::Titration<double>>(fit.chemistry);
  std::vector<double> knots;
  for (double v : curve.volume_mL) {
    if (std::isfinite(v) && (knots.empty() || v > knots.back())) knots.push_back(v);
  }
  std::vector<double> pH;
  // Each knot's solved state: the indicator check asks for the pH at hundreds of volumes between knots,
  // and a solve warm-started from the nearest knot costs a few Newton steps instead of a bracketing.
  // Knot by knot, the fitter's Newton (newton_next; the same balance, tests/fit) where it converges,
  // chem's bracketing solver from the knot before where it does not.
  auto fast = std::make_shared<const detail::FastBalance>(fit.chemistry);
  auto states = std::make_shared<std::vector<chem::Equilibrium>>();
  states->reserve(knots.size());
  chem::detail::BalanceJacobian jac;
  for (std::size_t i = 0; i < knots.size(); ++i) {
    chem::Equilibrium s;
    const bool chain = i >= 1 && (*states)[i - 1].converged && (i < 2 || (*states)[i - 2].converged);
    if (chain && newton_next(*fast, knots, *states, i, s, jac)) {
      states->push_back(s);
      pH.push_back(s.pH());
      continue;
    }
    chem::Equilibrium warm = i >= 1 ? (*states)[i - 1] : chem::Equilibrium{};
    const chem::Point<double> pt = titration->solve(knots[i], warm.converged ? &warm : nullptr);
    const bool ok = pt.state.converged && std::isfinite(pt.pH);
    pH.push_back(ok ? pt.pH : (pH.empty() ? 7.0 : pH.back()));
    states->push_back(ok ? pt.state : chem::Equilibrium{});
  }
  c.knots_mL = knots;
  c.knots_pH = pH;
  c.pH_at_mL = [titration, fast, knots, pH, states](double v) {
    const auto it = std::lower_bound(knots.begin(), knots.end(), v);
    std::size_t i = std::min(static_cast<std::size_t>(it - knots.begin()), knots.empty() ? 0 : knots.size() - 1);
    if (i > 0 && i < knots.size() && v - knots[i - 1] < knots[i] - v) --i;  // the nearer knot
    chem::Equilibrium start = i < states->size() ? (*states)[i] : chem::Equilibrium{};
    if (start.converged) {
      chem::Equilibrium s = start;
      chem::detail::BalanceJacobian j;
      if (fast->newton(v, s, j) && std::isfinite(s.pH())) return s.pH();
    }
    const chem::Point<double> pt = titration->solve(v, start.converged ? &start : nullptr);
    if (pt.state.converged && std::isfinite(pt.pH)) return pt.pH;
    if (pH.empty()) return 7.0;
    // Not expected inside the fitted range; the nearest knot keeps the curve finite.
    return pH[std::min(i, pH.size() - 1)];
  };
  c.mL_at_pH = [titration](double pH) { return titration->volume_at_pH(pH); };
  c.direction = fit.chemistry.titrant_sign > 0 ? +1 : -1;
  c.method = "model";
  c.exact = true;
  return c;
}

}  // namespace veq::fit
