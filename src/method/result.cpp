// SPDX-License-Identifier: MIT
// Result formulas, first-order uncertainty budgets, fixed-pH endpoints and spec verdicts.
#include "veq/method/result.hpp"

#include <algorithm>
#include <cctype>
#include <cmath>

#include <fmt/format.h>

#include "veq/analyze.hpp"

namespace veq::method {
namespace {

// Molar mass of KOH used by the acid-number formula (ASTM D664: 56.1).
constexpr double kKOH = 56.1;
// Equivalent weight of CaCO3 x 1000 in the alkalinity formula (SM 2320 B: 50 000).
constexpr double kCaCO3 = 50000.0;

double net(const FormulaInputs& in) { return in.volume_mL - in.blank_mL; }

}  // namespace

double formula_value(const FormulaInputs& in) {
  const double v = net(in);  // mL
  const double n_titrant_mmol = v * in.conc_mol_L * in.titer;  // mL x mol/L = mmol
  switch (in.unit) {
    case ResultUnit::mol_L: return n_titrant_mmol * in.stoichiometry / in.sample_volume_mL;
    case ResultUnit::g_L: return n_titrant_mmol * in.stoichiometry * in.molar_mass_g_mol / in.sample_volume_mL;
    case ResultUnit::mg_L: return 1000.0 * n_titrant_mmol * in.stoichiometry * in.molar_mass_g_mol / in.sample_volume_mL;
    case ResultUnit::percent_w_w:
      return n_titrant_mmol * in.stoichiometry * in.molar_mass_g_mol / (10.0 * in.sample_mass_g);
    case ResultUnit::mg_L_CaCO3: return n_titrant_mmol * in.equivalents * kCaCO3 / in.sample_volume_mL;
    case ResultUnit::mg_KOH_per_g: return n_titrant_mmol * kKOH / in.sample_mass_g;
    case ResultUnit::titrant_mol_L:
      // c = m P / (M nu (V - Vb) / 1000): mmol of standard over mL of titrant.
      return 1000.0 * in.sample_mass_g * in.purity / (in.molar_mass_g_mol * in.stoichiometry * v);
  }
  return 0.0;
}

std::string formula_text(ResultUnit unit) {
  switch (unit) {
    case ResultUnit::mol_L: return "(V - Vb) x Ct x t x nu / Vs";
    case ResultUnit::g_L: return "(V - Vb) x Ct x t x nu x M / Vs";
    case ResultUnit::mg_L: return "1000 x (V - Vb) x Ct x t x nu x M / Vs";
    case ResultUnit::percent_w_w: return "(V - Vb) x Ct x t x nu x M / (10 x m)";
    case ResultUnit::mg_L_CaCO3: return "(V - Vb) x N x 50 000 / Vs  (SM 2320 B; N = Ct x t x eq)";
    case ResultUnit::mg_KOH_per_g: return "(V - Vb) x Ct x t x 56.1 / m  (ASTM D664)";
    case ResultUnit::titrant_mol_L: return "1000 x m x P / (M x nu x (V - Vb))";
  }
  return "";
}

std::vector<BudgetItem> uncertainty_budget(const FormulaInputs& in, double& u_combined) {
  const double R = formula_value(in);
  const double v = net(in);
  std::vector<BudgetItem> items;
  // All formulas are products of powers of their inputs and of (V - Vb), so
  // dR/dx = e R / x for a factor x with exponent e, and dR/dV = e R / (V - Vb).
  const double ev = in.unit == ResultUnit::titrant_mol_L ? -1.0 : 1.0;
  auto add = [&](const char* name, const char* unit, double value, double u, double sensitivity) {
    if (!(u > 0)) return;
    items.push_back({name, unit, value, u, sensitivity, std::fabs(sensitivity * u), 0.0});
  };
  add("endpoint volume", "mL", in.volume_mL, in.volume_u_mL, ev * R / v);
  add("burette", "mL", in.volume_mL, in.burette_u_mL, ev * R / v);
  add("blank", "mL", in.blank_mL, in.blank_u_mL, -ev * R / v);
  const bool standardisation = in.unit == ResultUnit::titrant_mol_L;
  if (!standardisation) {
    add("titrant concentration", "mol/L", in.conc_mol_L, in.conc_u_mol_L, R / in.conc_mol_L);
    add("titer", "", in.titer, in.titer_u, R / in.titer);
  }
  switch (in.unit) {
    case ResultUnit::g_L:
    case ResultUnit::mg_L:
      add("molar mass", "g/mol", in.molar_mass_g_mol, in.molar_mass_u_g_mol, R / in.molar_mass_g_mol);
      [[fallthrough]];
    case ResultUnit::mol_L:
    case ResultUnit::mg_L_CaCO3:
      add("sample volume", "mL", in.sample_volume_mL, in.sample_volume_u_mL, -R / in.sample_volume_mL);
      break;
    case ResultUnit::percent_w_w:
      add("molar mass", "g/mol", in.molar_mass_g_mol, in.molar_mass_u_g_mol, R / in.molar_mass_g_mol);
      [[fallthrough]];
    case ResultUnit::mg_KOH_per_g:
      add("sample mass", "g", in.sample_mass_g, in.sample_mass_u_g, -R / in.sample_mass_g);
      break;
    case ResultUnit::titrant_mol_L:
      add("standard mass", "g", in.sample_mass_g, in.sample_mass_u_g, R / in.sample_mass_g);
      add("standard purity", "", in.purity, in.purity_u, R / in.purity);
      add("standard molar mass", "g/mol", in.molar_mass_g_mol, in.molar_mass_u_g_mol, -R / in.molar_mass_g_mol);
      break;
  }
  double sum2 = 0;
  for (const auto& i : items) sum2 += i.contribution * i.contribution;
  u_combined = std::sqrt(sum2);
  for (auto& i : items) i.percent = sum2 > 0 ? 100.0 * i.contribution * i.contribution / sum2 : 0.0;
  return items;
}

ResultSet compute_results(const Method& m, const Run& run, const Curve& curve,
                          const std::vector<signal::Endpoint>& endpoints,
                          const std::vector<signal::GranEndpoint>& gran,
                          const std::vector<std::optional<FittedVolume>>& fitted) {
  ResultSet out;
  out.method_name = m.name;
  out.method_path = m.path;
  auto fail = [&](std::size_t line, const std::string& msg, const std::string& hint = {}) {
    throw InputError({m.path, line, 0}, msg + " (run " + run.source + ")", hint);
  };
  // Facts the method states and the run states too: the method's are used, but a
  // reader must hear about a disagreement (a method picked for the wrong sample).
  auto differ = [](double a, double b, double rel) { return std::fabs(a - b) > rel * std::max(std::fabs(a), std::fabs(b)); };
  if (m.sample_volume_mL && run.facts.sample_volume_mL && differ(*m.sample_volume_mL, *run.facts.sample_volume_mL, 0.005)) {
    out.conflicts.push_back(fmt::format("the method's sample volume {:g} mL is used; the run says {:g} mL",
                                        *m.sample_volume_mL, *run.facts.sample_volume_mL));
  }
  if (m.sample_mass_g && run.facts.sample_mass_g && differ(*m.sample_mass_g, *run.facts.sample_mass_g, 0.005)) {
    out.conflicts.push_back(fmt::format("the method's sample mass {:g} g is used; the run says {:g} g", *m.sample_mass_g,
                                        *run.facts.sample_mass_g));
  }
  if (m.titrant_conc_mol_L && run.facts.titrant_conc_mol_L &&
      differ(*m.titrant_conc_mol_L, *run.facts.titrant_conc_mol_L, m.titer_file.empty() ? 0.01 : 0.10)) {
    out.conflicts.push_back(fmt::format("the method's titrant concentration {:g} mol/L is used; the run says {:g} mol/L",
                                        *m.titrant_conc_mol_L, *run.facts.titrant_conc_mol_L));
  }
  {
    // The method's titrant (by name) against the run's: base or acid.
    const std::string name = m.titrant_name;
    std::string n;
    for (char c : name) n.push_back(static_cast<char>(std::tolower(static_cast<unsigned char>(c))));
    TitrantKind method_kind = TitrantKind::unknown;
    for (const char* b : {"naoh", "koh", "lioh", "hydroxide", "base"}) {
      if (n.find(b) != std::string::npos) method_kind = TitrantKind::base;
    }
    for (const char* a : {"hcl", "h2so4", "hno3", "hclo4", "acid"}) {
      if (n.find(a) != std::string::npos) method_kind = TitrantKind::acid;
    }
    TitrantKind run_kind = run.facts.titrant_kind;
    if (run_kind == TitrantKind::unknown && curve.signal == SignalKind::ph && !curve.converted_from_mv) {
      run_kind = curve.direction > 0 ? TitrantKind::base : TitrantKind::acid;
    }
    if (method_kind != TitrantKind::unknown && run_kind != TitrantKind::unknown && method_kind != run_kind) {
      auto with_article = [](TitrantKind k) { return k == TitrantKind::acid ? "an acid" : "a base"; };
      out.conflicts.push_back(fmt::format("the method titrates with {} ({}), but this run was titrated with {}",
                                          with_article(method_kind), name, with_article(run_kind)));
    }
  }
  if (m.endpoints_required && static_cast<int>(endpoints.size()) < *m.endpoints_required) {
    out.acceptance_failures.push_back(fmt::format("the method requires {} endpoint(s); the run has {}",
                                                  *m.endpoints_required, endpoints.size()));
  }
  for (const ResultSpec& spec : m.results) {
    Result r;
    r.name = spec.name;
    r.unit = spec.unit;
    r.formula = formula_text(spec.unit);
    r.spec_low = spec.spec_low;
    r.spec_high = spec.spec_high;
    FormulaInputs in;
    in.unit = spec.unit;

    // The endpoint volume.
    if (spec.endpoint.at_pH) {
      const double target = *spec.endpoint.at_pH;
      r.at_pH = target;
      r.volume_source = "fixed_pH";
      if (curve.signal != SignalKind::ph) {
        fail(spec.line, fmt::format("result '{}' needs the volume at pH {:g}, but the run is in mV without an electrode "
                                    "calibration", spec.name, target),
             "give --e0/--slope or --buffers, or E0 and slope lines in the file");
      }
      std::vector<double> v, y;
      for (std::size_t i = 0; i < curve.volume_mL.size(); ++i) {
        if (i < curve.spike.size() && curve.spike[i]) continue;
        v.push_back(curve.volume_mL[i]);
        y.push_back(curve.value[i]);
      }
      const int d = curve.direction;
      if (!v.empty() && (y.front() - target) * d >= 0) {
        // Already at or past the target: nothing to titrate to it (P alkalinity of a
        // sample at pH <= 8.3 is 0; SM 2320 B, IUPAC Gold Book "phenolphthalein alkalinity").
        in.volume_mL = v.front();
        r.notes.push_back(fmt::format("the run starts at pH {:.2f}, already past pH {:g}", y.front(), target));
      } else {
        bool found = false;
        for (std::size_t i = 0; i + 1 < v.size() && !found; ++i) {
          if ((y[i] - target) * d < 0 && (y[i + 1] - target) * d >= 0) {
            const double t = (target - y[i]) / (y[i + 1] - y[i]);
            in.volume_mL = v[i] + t * (v[i + 1] - v[i]);
            // u(V) = |dV/dpH| x u(pH reading), with the reading noise on top.
            const double slope = (v[i + 1] - v[i]) / (y[i + 1] - y[i]);
            const double u_ph = std::hypot(spec.endpoint.pH_uncertainty, curve.noise_sd);
            in.volume_u_mL = std::fabs(slope) * u_ph;
            found = true;
          }
        }
        if (!found) {
          fail(spec.line, fmt::format("result '{}': the curve never reaches pH {:g}", spec.name, target),
               "titrate further, or check the method's at_pH");
        }
      }
    } else {
      if (endpoints.empty()) fail(spec.line, fmt::format("result '{}' needs an endpoint, and the run has none", spec.name));
      const int idx = spec.endpoint.last ? static_cast<int>(endpoints.size()) : spec.endpoint.index;
      if (idx < 1 || idx > static_cast<int>(endpoints.size())) {
        fail(spec.line, fmt::format("result '{}' uses endpoint {}, and the run has {}", spec.name, idx, endpoints.size()));
      }
      const signal::Endpoint& e = endpoints[static_cast<std::size_t>(idx - 1)];
      r.endpoint_index = idx;
      r.volume_source = std::string(to_string(spec.endpoint.source));
      switch (spec.endpoint.source) {
        case VolumeSource::consensus:
          in.volume_mL = e.volume_mL;
          in.volume_u_mL = e.uncertainty_mL;
          break;
        case VolumeSource::derivative:
          in.volume_mL = e.derivative_volume_mL;
          in.volume_u_mL = e.derivative_uncertainty_mL;
          break;
        case VolumeSource::gran: {
          const signal::GranEndpoint* g = static_cast<std::size_t>(idx - 1) < gran.size() ? &gran[idx - 1] : nullptr;
          const signal::GranBranch* b = nullptr;
          if (g && g->before && g->before->linear) b = &*g->before;
          else if (g && g->after && g->after->linear) b = &*g->after;
          if (!b) {
            fail(spec.line, fmt::format("result '{}' asks for the Gran volume of endpoint {}, and there is none", spec.name, idx),
                 "the Gran method needs the sample volume and a straight branch; see the run's warnings");
          }
          in.volume_mL = b->volume_mL;
          in.volume_u_mL = b->uncertainty_mL;
          break;
        }
        case VolumeSource::fit: {
          const std::size_t i = static_cast<std::size_t>(idx - 1);
          if (i >= fitted.size() || !fitted[i]) {
            fail(spec.line,
                 fmt::format("result '{}' asks for the fitted volume of endpoint {}, and the run has no usable "
                             "charge-balance fit there", spec.name, idx),
                 "the fit needs the sample volume and titrant concentration and must pass its checks (see the run's "
                 "warnings); or use volume_from = \"consensus\"");
          }
          in.volume_mL = fitted[i]->volume_mL;
          in.volume_u_mL = fitted[i]->uncertainty_mL;
          break;
        }
      }
    }
    r.endpoint_volume_mL = in.volume_mL;
    in.burette_u_mL = m.burette_tolerance_mL / std::sqrt(3.0);  // rectangular (GUM 4.3.7)
    in.blank_mL = m.blank_mL;
    in.blank_u_mL = m.blank_u_mL;
    in.stoichiometry = m.stoichiometry;
    in.equivalents = m.titrant_equivalents;

    const bool standardisation = spec.unit == ResultUnit::titrant_mol_L;
    if (!standardisation) {
      if (m.titrant_conc_mol_L) {
        in.conc_mol_L = *m.titrant_conc_mol_L;
        in.conc_u_mol_L = m.titrant_conc_u_mol_L;
      } else if (run.facts.titrant_conc_mol_L) {
        in.conc_mol_L = *run.facts.titrant_conc_mol_L;
        r.notes.push_back("titrant concentration from the run (no uncertainty known)");
      } else {
        fail(spec.line, fmt::format("result '{}' needs the titrant concentration", spec.name),
             "set [titrant] concentration_mol_L or titer_file in the method, or give --titrant-conc");
      }
      in.titer = m.titer;
      in.titer_u = m.titer_u;
      in.molar_mass_g_mol = m.molar_mass_g_mol.value_or(0.0);
      in.molar_mass_u_g_mol = m.molar_mass_u_g_mol;
    } else {
      in.molar_mass_g_mol = *m.standard_molar_mass_g_mol;
      in.molar_mass_u_g_mol = m.standard_molar_mass_u_g_mol;
      in.purity = m.standard_purity;
      in.purity_u = m.standard_purity_u;
    }
    const bool needs_volume = spec.unit == ResultUnit::mol_L || spec.unit == ResultUnit::g_L ||
                              spec.unit == ResultUnit::mg_L || spec.unit == ResultUnit::mg_L_CaCO3;
    const bool needs_mass = spec.unit == ResultUnit::percent_w_w || spec.unit == ResultUnit::mg_KOH_per_g || standardisation;
    if (needs_volume) {
      // The method's sample volume wins over the run's metadata; the command line has already
      // overridden the run's facts.
      if (m.sample_volume_mL) {
        in.sample_volume_mL = *m.sample_volume_mL;
        in.sample_volume_u_mL = m.sample_volume_u_mL;
      } else if (run.facts.sample_volume_mL) {
        in.sample_volume_mL = *run.facts.sample_volume_mL;
        in.sample_volume_u_mL = m.sample_volume_u_mL;
      } else {
        fail(spec.line, fmt::format("result '{}' needs the sample volume", spec.name),
             "set [sample] volume_mL in the method, add a 'Sample volume' line to the file, or give --sample-volume");
      }
    }
    if (needs_mass) {
      const std::optional<double>& from_method = standardisation ? m.standard_mass_g : m.sample_mass_g;
      const double u = standardisation ? m.standard_mass_u_g : m.sample_mass_u_g;
      if (from_method) {
        in.sample_mass_g = *from_method;
      } else if (run.facts.sample_mass_g) {
        in.sample_mass_g = *run.facts.sample_mass_g;
      } else {
        fail(spec.line, fmt::format("result '{}' needs the {} mass", spec.name, standardisation ? "standard" : "sample"),
             standardisation ? "set [standard] mass_g in the method or add a 'Sample mass' line to the file"
                             : "set [sample] mass_g in the method or add a 'Sample mass' line to the file");
      }
      in.sample_mass_u_g = u;
    }
    if (!(net(in) > 0)) {
      fail(spec.line, fmt::format("result '{}': the endpoint volume {:.4f} mL is not above the blank {:.4f} mL", spec.name,
                                  in.volume_mL, in.blank_mL));
    }
    r.value = formula_value(in);
    double u = 0;
    r.budget = uncertainty_budget(in, u);
    r.uncertainty = u;
    r.expanded_uncertainty = 2.0 * u;  // coverage factor k = 2 (GUM §6.2.1, about 95 %)
    r.decimals = spec.decimals >= 0 ? spec.decimals
                                    : (u > 0 ? std::clamp(1 - static_cast<int>(std::floor(std::log10(2.0 * u))), 0, 8) : 4);
    if (spec.spec_low || spec.spec_high) {
      // Decision rule (ILAC-G8:2019, simple acceptance with a flag): pass/fail by the value;
      // "borderline" when the expanded-uncertainty interval crosses a limit.
      const double U = r.expanded_uncertainty;
      const bool inside = (!spec.spec_low || r.value >= *spec.spec_low) && (!spec.spec_high || r.value <= *spec.spec_high);
      const bool near = (spec.spec_low && std::fabs(r.value - *spec.spec_low) <= U) ||
                        (spec.spec_high && std::fabs(r.value - *spec.spec_high) <= U);
      r.verdict = near ? "borderline" : inside ? "pass" : "fail";
    }
    if (standardisation) {
      TiterRecord t;
      t.titrant = m.titrant_name.empty() ? run.facts.titrant_name : m.titrant_name;
      t.concentration_mol_L = r.value;
      t.uncertainty_mol_L = r.uncertainty;
      t.nominal_mol_L = m.titrant_conc_mol_L.value_or(run.facts.titrant_conc_mol_L.value_or(0.0));
      t.standard = m.standard_name;
      t.source_run = run.source;
      for (const auto& [k, val] : run.metadata) {
        std::string key;
        for (char c : k) key.push_back(static_cast<char>(std::tolower(static_cast<unsigned char>(c))));
        if (key == "date" || key == "date/time" || key == "datetime") t.date = val;
      }
      t.veq_version = version();
      out.titer = t;
    }
    out.results.push_back(std::move(r));
  }
  return out;
}

}  // namespace veq::method
