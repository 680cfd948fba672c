// SPDX-License-Identifier: MIT
// From a lab's description of a titration to the numerical model; speciation for reports.
#include "veq/chem/sample.hpp"

#include <fmt/format.h>

#include <cmath>

#include "veq/chem/analytes.hpp"
#include "veq/core/error.hpp"

namespace veq::chem {

std::string_view to_string(AnalyteKind k) {
  switch (k) {
    case AnalyteKind::weak:
      return "weak";
    case AnalyteKind::strong_acid:
      return "strong acid";
    case AnalyteKind::strong_base:
      return "strong base";
  }
  return "weak";
}

double Analyte::pKa_at(std::size_t j, double temperature_C) const {
  const double slope = j < dpKa_dT_per_K.size() ? dpKa_dT_per_K[j] : 0.0;
  return pKa_25C.at(j) + slope * (temperature_C - constants::kStandardTemperatureC);
}

std::vector<std::string> Sample::validate() const {
  std::vector<std::string> p;
  if (!(volume_mL > 0.0 && std::isfinite(volume_mL)))
    p.push_back(fmt::format("volume_mL = {}: the sample volume must be positive", volume_mL));
  if (!(background_ionic_strength_mol_L >= 0.0 && background_ionic_strength_mol_L <= 5.0))
    p.push_back(
        fmt::format("background_ionic_strength_mol_L = {}: must be in [0, 5]", background_ionic_strength_mol_L));
  for (std::size_t i = 0; i < analytes.size(); ++i) {
    const Analyte& a = analytes[i];
    const std::string who = fmt::format("analyte {} ({})", i + 1, a.name.empty() ? "unnamed" : a.name);
    if (!(a.conc_mol_L >= 0.0 && a.conc_mol_L <= 20.0))
      p.push_back(fmt::format("{}: conc_mol_L = {}: must be in [0, 20]", who, a.conc_mol_L));
    if (a.kind != AnalyteKind::weak) continue;
    const std::size_t n = a.pKa_25C.size();
    if (n < 1 || n > static_cast<std::size_t>(kMaxSteps)) {
      p.push_back(fmt::format("{}: {} pKa values: a weak acid or base needs 1 to {}", who, n, kMaxSteps));
      continue;
    }
    for (std::size_t j = 0; j < n; ++j) {
      if (!(a.pKa_25C[j] >= -5.0 && a.pKa_25C[j] <= 20.0))
        p.push_back(fmt::format("{}: pKa {} = {}: must be in [-5, 20]", who, j + 1, a.pKa_25C[j]));
      if (j > 0 && a.pKa_25C[j] < a.pKa_25C[j - 1])
        p.push_back(fmt::format("{}: pKa values must be in ascending order", who));
    }
    if (!a.dpKa_dT_per_K.empty() && a.dpKa_dT_per_K.size() != n)
      p.push_back(fmt::format("{}: {} temperature coefficients for {} pKa values", who, a.dpKa_dT_per_K.size(), n));
    if (a.top_charge < -4 || a.top_charge > 4)
      p.push_back(fmt::format("{}: top_charge = {}: must be in [-4, 4]", who, a.top_charge));
    if (a.added_form < 0 || a.added_form > static_cast<int>(n))
      p.push_back(fmt::format(
          "{}: added_form = {}: must be in [0, {}] (protons lost by the added form)", who, a.added_form, n));
  }
  return p;
}

std::vector<std::string> Titrant::validate() const {
  std::vector<std::string> p;
  if (kind == TitrantKind::unknown) p.push_back("kind: the titrant must be an acid or a base");
  if (!(conc_mol_L > 0.0 && conc_mol_L <= 20.0))
    p.push_back(fmt::format("conc_mol_L = {}: the titrant concentration must be in (0, 20]", conc_mol_L));
  if (!(carbonate_fraction >= 0.0 && carbonate_fraction <= 1.0))
    p.push_back(fmt::format("carbonate_fraction = {}: must be in [0, 1]", carbonate_fraction));
  if (kind == TitrantKind::acid && carbonate_fraction > 0.0)
    p.push_back("carbonate_fraction: only a base titrant absorbs CO2 as carbonate");
  return p;
}

std::vector<std::string> ModelOptions::validate() const {
  std::vector<std::string> p;
  if (!(temperature_C >= 0.0 && temperature_C <= 100.0))
    p.push_back(fmt::format("temperature_C = {}: must be in [0, 100]", temperature_C));
  if (kw == KwFormula::harned_robinson_1940 && !(temperature_C >= 0.0 && temperature_C <= 60.0))
    p.push_back(fmt::format("temperature_C = {}: the Harned & Robinson Kw formula holds for 0-60 °C", temperature_C));
  if (davies_A && !(*davies_A > 0.0 && *davies_A < 2.0))
    p.push_back(fmt::format("davies_A = {}: must be in (0, 2)", *davies_A));
  if (!(davies_b >= 0.0 && davies_b <= 1.0)) p.push_back(fmt::format("davies_b = {}: must be in [0, 1]", davies_b));
  return p;
}

Model<double> build_model(const Sample& sample, const Titrant& titrant, const ModelOptions& options) {
  std::vector<std::string> problems = sample.validate();
  for (auto& s : titrant.validate()) problems.push_back("titrant " + s);
  for (auto& s : options.validate()) problems.push_back(s);
  if (!problems.empty()) {
    std::string all;
    for (const auto& s : problems) all += (all.empty() ? "" : "; ") + s;
    throw InputError({"model", 0, 0}, all);
  }
  const double t = options.temperature_C;
  Model<double> m;
  m.sample_volume_mL = sample.volume_mL;
  m.background_ionic_strength_mol_L = sample.background_ionic_strength_mol_L;
  for (const Analyte& a : sample.analytes) {
    switch (a.kind) {
      case AnalyteKind::strong_acid:
        m.strong_acid_mol_L += a.conc_mol_L;
        break;
      case AnalyteKind::strong_base:
        m.strong_base_mol_L += a.conc_mol_L;
        break;
      case AnalyteKind::weak: {
        Protolyte<double> p;
        p.steps = static_cast<int>(a.pKa_25C.size());
        p.top_charge = a.top_charge;
        p.added_form = a.added_form;
        for (std::size_t j = 0; j < a.pKa_25C.size(); ++j) p.pKa[j] = a.pKa_at(j, t);
        p.conc_mol_L = a.conc_mol_L;
        m.protolytes.push_back(p);
        break;
      }
    }
  }
  m.titrant_sign = titrant.kind == TitrantKind::acid ? -1 : +1;
  m.titrant_conc_mol_L = titrant.conc_mol_L;
  if (titrant.carbonate_fraction > 0.0) {
    const AnalyteInfo* carbonic = find_analyte("carbonic acid");
    if (carbonic == nullptr || carbonic->pKa_25C.size() != 2)
      throw std::logic_error("analyte table lacks carbonic acid");
    m.titrant_carbonate.steps = 2;
    m.titrant_carbonate.top_charge = 0;
    m.titrant_carbonate.added_form = 2;
    for (std::size_t j = 0; j < 2; ++j) {
      const double slope = carbonic->dpKa_dT_per_K.empty() ? 0.0 : carbonic->dpKa_dT_per_K[j];
      m.titrant_carbonate.pKa[j] = carbonic->pKa_25C[j] + slope * (t - constants::kStandardTemperatureC);
    }
    m.titrant_carbonate.conc_mol_L = 0.5 * titrant.carbonate_fraction * titrant.conc_mol_L;
  }
  m.pKw = pKw(t, options.kw);
  m.activity = options.activity;
  m.davies_A = options.davies_A.value_or(debye_huckel_A(t));
  m.davies_b = options.davies_b;
  return m;
}

std::string form_label(int top_charge, int steps, int j) {
  const int h = steps - j;
  const int z = top_charge - j;
  std::string s;
  if (h >= 1) s.push_back('H');
  if (h > 1) s.append(std::to_string(h));
  s.push_back('A');
  if (z > 1 || z < -1) s.append(std::to_string(z > 0 ? z : -z));
  if (z > 0) s.push_back('+');
  if (z < 0) s.push_back('-');
  return s;
}

std::vector<double> fractions_at_pH(const Protolyte<double>& p, double pH, double log10_gamma1) {
  std::vector<double> f(static_cast<std::size_t>(p.steps) + 1);
  form_fractions(p, -pH - log10_gamma1, log10_gamma1, f.data());
  return f;
}

std::vector<AnalyteSpeciation> speciation(const Sample& sample,
                                          const Model<double>& model,
                                          double volume_mL,
                                          const Equilibrium& eq) {
  std::vector<AnalyteSpeciation> out;
  const double d = sample_dilution(model, volume_mL);
  auto one = [&](const std::string& name, const Protolyte<double>& p, double conc) {
    AnalyteSpeciation s;
    s.name = name;
    std::vector<double> f(static_cast<std::size_t>(p.steps) + 1);
    form_fractions(p, eq.log10_h, eq.log10_gamma1, f.data());
    for (int j = 0; j <= p.steps; ++j) {
      s.forms.push_back({j,
                         p.top_charge - j,
                         form_label(p.top_charge, p.steps, j),
                         f[static_cast<std::size_t>(j)],
                         conc * f[static_cast<std::size_t>(j)]});
    }
    out.push_back(std::move(s));
  };
  std::size_t k = 0;
  for (const Analyte& a : sample.analytes) {
    if (a.kind != AnalyteKind::weak) continue;
    if (k >= model.protolytes.size()) break;
    one(a.name, model.protolytes[k], d * model.protolytes[k].conc_mol_L);
    ++k;
  }
  if (model.titrant_carbonate.steps > 0 && model.titrant_carbonate.conc_mol_L > 0.0) {
    one("carbonate (titrant)", model.titrant_carbonate, (1.0 - d) * model.titrant_carbonate.conc_mol_L);
  }
  return out;
}

}  // namespace veq::chem
