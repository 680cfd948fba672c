// SPDX-License-Identifier: MIT
// The numerical titration model: what is in the vessel, as numbers of scalar type T, and its charge balance.
//
// Notation (DEVELOPERS.md, "Chemistry model"): x = log10 [H+] ([H+] in mol/L);
// L = log10 of the activity coefficient of a univalent ion (0 when ideal);
// pH = -log10 a(H+) = -(x + L). Every function here is a template on the
// scalar type so that a fitter's dual numbers (Ceres Jets) pass through.
#pragma once

#include <array>
#include <cassert>
#include <cmath>
#include <vector>

#include "veq/chem/activity.hpp"
#include "veq/chem/scalar.hpp"
#include "veq/core/constants.hpp"

namespace veq::chem {

// Most dissociation steps one acid–base system may have (tetraprotic).
inline constexpr int kMaxSteps = 4;

// One acid–base system H_nA in the vessel with its n dissociation steps
// H_(n-j+1)A <=> H+ + H_(n-j)A, j = 1..n. Form j (j = 0..n) has lost j
// protons and carries charge top_charge - j.
template <typename T>
struct Protolyte {
  int steps = 1;                   // n, 1..kMaxSteps
  int top_charge = 0;              // charge of the fully protonated form (0 for acetic acid, +1 for NH4+)
  int added_form = 0;              // form the substance was added as (1 for KHP, 2 for Na2CO3); its
                                   // charge is balanced by univalent spectator ions (K+, Na+, Cl-)
  std::array<T, kMaxSteps> pKa{};  // thermodynamic pKa_1..pKa_n at the run's temperature (I -> 0)
  T conc_mol_L = T(0.0);           // total concentration in the sample before any titrant [mol/L]
};

// Everything that fixes a titration curve, as numbers.
template <typename T>
struct Model {
  T sample_volume_mL = T(25.0);                // V0 [mL]
  T strong_acid_mol_L = T(0.0);                // fully dissociated acid HX in the sample [mol/L]
  T strong_base_mol_L = T(0.0);                // fully dissociated base MOH in the sample [mol/L]
  T background_ionic_strength_mol_L = T(0.0);  // inert electrolyte of the sample, as ionic strength [mol/L]
  std::vector<Protolyte<T>> protolytes;        // weak acids and bases of the sample
  int titrant_sign = +1;                       // +1 strong base (pH rises), -1 strong acid
  T titrant_conc_mol_L = T(0.1);               // Ct [mol/L] (base: total M+; acid: total X-)
  // Carbonate in a base titrant (absorbed CO2), added as CO3^2- [mol/L of titrant]; steps = 0 when there is
  // none. build_model() sets steps = 2 and the pKa values of carbonic acid when the titrant holds some.
  Protolyte<T> titrant_carbonate{0, 0, 2, {}, T(0.0)};
  T pKw = T(13.995);  // at the run's temperature
  ActivityModel activity = ActivityModel::davies;
  T davies_A = T(0.5085);  // Debye–Hückel A at the run's temperature [(mol/L)^-1/2]
  double davies_b = 0.3;   // Davies coefficient (not a fit parameter)
};

// The same model with every number converted to scalar type To.
template <typename To, typename From>
[[nodiscard]] Protolyte<To> protolyte_cast(const Protolyte<From>& p) {
  Protolyte<To> out;
  out.steps = p.steps;
  out.top_charge = p.top_charge;
  out.added_form = p.added_form;
  for (int j = 0; j < kMaxSteps; ++j) out.pKa[j] = scalar_cast<To>(p.pKa[j]);
  out.conc_mol_L = scalar_cast<To>(p.conc_mol_L);
  return out;
}

template <typename To, typename From>
[[nodiscard]] Model<To> model_cast(const Model<From>& m) {
  Model<To> out;
  out.sample_volume_mL = scalar_cast<To>(m.sample_volume_mL);
  out.strong_acid_mol_L = scalar_cast<To>(m.strong_acid_mol_L);
  out.strong_base_mol_L = scalar_cast<To>(m.strong_base_mol_L);
  out.background_ionic_strength_mol_L = scalar_cast<To>(m.background_ionic_strength_mol_L);
  out.protolytes.reserve(m.protolytes.size());
  for (const auto& p : m.protolytes) out.protolytes.push_back(protolyte_cast<To>(p));
  out.titrant_sign = m.titrant_sign;
  out.titrant_conc_mol_L = scalar_cast<To>(m.titrant_conc_mol_L);
  out.titrant_carbonate = protolyte_cast<To>(m.titrant_carbonate);
  out.pKw = scalar_cast<To>(m.pKw);
  out.activity = m.activity;
  out.davies_A = scalar_cast<To>(m.davies_A);
  out.davies_b = m.davies_b;
  return out;
}

// Fractions of the forms of protolyte p (form j lost j protons) at
// log10 [H+] = log10_h and univalent log10 gamma = log10_gamma1, written to
// fractions[0..steps]. Conditional constants: log10 K'_j = -pKa_j +
// 2 L (top_charge - j) (Davies activity coefficients in the mass-action law).
template <typename T>
void form_fractions(const Protolyte<T>& p, const T& log10_h, const T& log10_gamma1, T* fractions) {
  using std::exp;
  assert(p.steps >= 0 && p.steps <= kMaxSteps);
  T term = T(1.0);
  T sum = T(1.0);
  fractions[0] = T(1.0);
  for (int j = 1; j <= p.steps; ++j) {
    const T log10_ratio = -p.pKa[j - 1] + 2.0 * static_cast<double>(p.top_charge - j) * log10_gamma1 - log10_h;
    term = term * exp(constants::kLn10 * log10_ratio);
    fractions[j] = term;
    sum = sum + term;
  }
  for (int j = 0; j <= p.steps; ++j) fractions[j] = fractions[j] / sum;
}

// Charge balance and ionic strength of one part of the vessel's contents.
template <typename T>
struct BalanceValue {
  T charge = T(0.0);          // sum of z c over the ions [mol/L]; zero at equilibrium for the whole vessel
  T ionic_strength = T(0.0);  // I = 1/2 sum z^2 c [mol/L]
  T charge_scale = T(0.0);    // sum of |z| c, for relative residuals [mol/L]
};

// The vessel's ions split by origin, at x = log10 [H+] and L: water (H+ and
// OH-), the undiluted sample, and the pure titrant. After volume V the vessel
// holds water + d * sample + (1 - d) * titrant with d = V0/(V0+V).
template <typename T>
struct VesselParts {
  BalanceValue<T> water;
  BalanceValue<T> sample;   // per unit dilution: as if d = 1
  BalanceValue<T> titrant;  // as if d = 0
};

// Dilution factor of the sample, V0/(V0+V).
template <typename T>
[[nodiscard]] T sample_dilution(const Model<T>& m, const T& volume_mL) {
  return m.sample_volume_mL / (m.sample_volume_mL + volume_mL);
}

namespace detail {
template <typename T>
void add_protolyte(
    const Protolyte<T>& p, const T& log10_h, const T& log10_gamma1, bool counter_ions, BalanceValue<T>& out) {
  std::array<T, kMaxSteps + 1> f;
  form_fractions(p, log10_h, log10_gamma1, f.data());
  T mean_charge = T(0.0), mean_charge2 = T(0.0), mean_abs = T(0.0);
  for (int j = 0; j <= p.steps; ++j) {
    const double q = static_cast<double>(p.top_charge - j);
    mean_charge = mean_charge + q * f[j];
    mean_charge2 = mean_charge2 + (q * q) * f[j];
    mean_abs = mean_abs + std::fabs(q) * f[j];
  }
  out.charge = out.charge + p.conc_mol_L * mean_charge;
  out.ionic_strength = out.ionic_strength + 0.5 * p.conc_mol_L * mean_charge2;
  out.charge_scale = out.charge_scale + p.conc_mol_L * mean_abs;
  if (counter_ions) {
    // Univalent spectator ions balancing the charge of the form that was added.
    const double q_added = static_cast<double>(p.top_charge - p.added_form);
    out.charge = out.charge - q_added * p.conc_mol_L;
    out.ionic_strength = out.ionic_strength + 0.5 * std::fabs(q_added) * p.conc_mol_L;
    out.charge_scale = out.charge_scale + std::fabs(q_added) * p.conc_mol_L;
  }
}
}  // namespace detail

// The ions of the vessel by origin (see VesselParts), written directly from
// the composition. This is the plain form of the equations: the solver's fast
// path is checked against it, and derivatives through the root use it.
template <typename T>
[[nodiscard]] VesselParts<T> vessel_parts(const Model<T>& m, const T& log10_h, const T& log10_gamma1) {
  using std::exp;
  VesselParts<T> v;
  const T h = exp(constants::kLn10 * log10_h);
  const T oh = exp(constants::kLn10 * (-m.pKw - 2.0 * log10_gamma1 - log10_h));
  v.water.charge = h - oh;
  v.water.ionic_strength = 0.5 * (h + oh);
  v.water.charge_scale = h + oh;
  v.sample.charge = m.strong_base_mol_L - m.strong_acid_mol_L;
  v.sample.ionic_strength = 0.5 * (m.strong_acid_mol_L + m.strong_base_mol_L) + m.background_ionic_strength_mol_L;
  v.sample.charge_scale = m.strong_acid_mol_L + m.strong_base_mol_L;
  for (const auto& p : m.protolytes) detail::add_protolyte(p, log10_h, log10_gamma1, true, v.sample);
  v.titrant.charge = static_cast<double>(m.titrant_sign) * m.titrant_conc_mol_L;
  v.titrant.ionic_strength = 0.5 * m.titrant_conc_mol_L;
  v.titrant.charge_scale = m.titrant_conc_mol_L;
  // Carbonate's cations are already counted in Ct.
  if (m.titrant_carbonate.steps > 0)
    detail::add_protolyte(m.titrant_carbonate, log10_h, log10_gamma1, false, v.titrant);
  return v;
}

// The whole vessel after volume_mL of titrant.
template <typename T>
[[nodiscard]] BalanceValue<T> charge_balance(const Model<T>& m,
                                             const T& volume_mL,
                                             const T& log10_h,
                                             const T& log10_gamma1) {
  const VesselParts<T> v = vessel_parts(m, log10_h, log10_gamma1);
  const T d = sample_dilution(m, volume_mL);
  const T e = 1.0 - d;
  BalanceValue<T> b;
  b.charge = v.water.charge + d * v.sample.charge + e * v.titrant.charge;
  b.ionic_strength = v.water.ionic_strength + d * v.sample.ionic_strength + e * v.titrant.ionic_strength;
  b.charge_scale = v.water.charge_scale + d * v.sample.charge_scale + e * v.titrant.charge_scale;
  return b;
}

}  // namespace veq::chem
