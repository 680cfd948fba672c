// SPDX-License-Identifier: MIT
// What a lab would write down about a titration: the sample's substances, the titrant, the conditions.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "veq/chem/activity.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/model.hpp"
#include "veq/chem/water.hpp"
#include "veq/core/run.hpp"

namespace veq::chem {

enum class AnalyteKind {
  weak,         // a weak acid or base with 1–4 pKa values
  strong_acid,  // fully dissociated, one proton per formula unit (HCl)
  strong_base   // fully dissociated, one hydroxide per formula unit (NaOH)
};

[[nodiscard]] std::string_view to_string(AnalyteKind k);  // "weak", "strong acid", "strong base"

// One substance in the sample.
struct Analyte {
  std::string name;  // for reports ("acetic acid", "weak acid 1")
  AnalyteKind kind = AnalyteKind::weak;
  double conc_mol_L = 0.0;  // total concentration in the sample [mol/L]
  // Weak only. pKa values at 25 °C (thermodynamic, I -> 0), ascending, 1–4 of them.
  std::vector<double> pKa_25C;
  // Weak only. Temperature coefficient of each pKa [1/K]; empty means 0.
  std::vector<double> dpKa_dT_per_K;
  // Weak only. Charge of the fully protonated form: 0 for acids such as acetic
  // acid, +1 for the conjugate acid of a base with one basic site (NH4+).
  int top_charge = 0;
  // Weak only. Protons the added form has lost relative to the fully
  // protonated one: 0 acetic acid, 1 KHP or ammonia, 2 Na2CO3. The added
  // form's charge is balanced by univalent spectator ions.
  int added_form = 0;

  // pKa of step j (0-based) at temperature_C [°C].
  [[nodiscard]] double pKa_at(std::size_t j, double temperature_C) const;
};

struct Sample {
  double volume_mL = 25.0;  // V0 [mL]
  std::vector<Analyte> analytes;
  double background_ionic_strength_mol_L = 0.0;  // inert electrolyte, e.g. 0.1 for 0.1 mol/L KCl [mol/L]

  // One line per problem, naming the analyte ("analyte 2 (acetic acid): conc_mol_L = -1: must be >= 0").
  [[nodiscard]] std::vector<std::string> validate() const;
};

struct Titrant {
  TitrantKind kind = TitrantKind::base;  // base: pH rises; acid: pH falls
  double conc_mol_L = 0.1;               // Ct [mol/L]
  // Base titrant only: fraction of its hydroxide turned into carbonate by
  // absorbed CO2 (2 OH- + CO2 -> CO3^2- + H2O): carbonate = f Ct / 2, the
  // cation stays Ct. 0–1.
  double carbonate_fraction = 0.0;
  std::string name;  // for reports ("NaOH"); empty: "NaOH" or "HCl"

  [[nodiscard]] std::vector<std::string> validate() const;
};

struct ModelOptions {
  double temperature_C = 25.0;                     // [°C], 0–100
  ActivityModel activity = ActivityModel::davies;  // ideal or Davies
  KwFormula kw = KwFormula::iapws_r11_07;          // Kw(T) formula
  std::optional<double> davies_A;                  // Debye–Hückel A; default debye_huckel_A(temperature_C)
  double davies_b = 0.3;                           // Davies coefficient

  [[nodiscard]] std::vector<std::string> validate() const;
};

// The numerical model of a titration. Weak analytes become protolytes in the
// order they appear in sample.analytes; strong acids and bases are summed.
// Throws InputError (source "model") for an invalid description.
[[nodiscard]] Model<double> build_model(const Sample& sample, const Titrant& titrant, const ModelOptions& options = {});

// Fraction and concentration of one form of one analyte.
struct FormShare {
  int protons_lost = 0;     // j: 0 is the fully protonated form
  int charge = 0;           // top_charge - j
  std::string label;        // "H3A", "H2A-", "HA2-", "A3-" (A for the analyte, B+ style for cations: "HA+")
  double fraction = 0.0;    // alpha_j
  double conc_mol_L = 0.0;  // in the vessel [mol/L]
};

struct AnalyteSpeciation {
  std::string name;
  std::vector<FormShare> forms;
};

// Generic label of form j of a system with top_charge and steps ("H2A-").
[[nodiscard]] std::string form_label(int top_charge, int steps, int j);

// Speciation of every weak analyte of the sample in the vessel after
// volume_mL of titrant, at the solved state eq (from Titration::solve). The
// titrant's carbonate, when present, comes last as "carbonate (titrant)".
[[nodiscard]] std::vector<AnalyteSpeciation> speciation(const Sample& sample,
                                                        const Model<double>& model,
                                                        double volume_mL,
                                                        const Equilibrium& eq);

// Fractions alpha_0..alpha_n of the forms of protolyte p at a given pH
// (-log10 a(H+)) and univalent log10 gamma (0: ideal solution).
[[nodiscard]] std::vector<double> fractions_at_pH(const Protolyte<double>& p, double pH, double log10_gamma1 = 0.0);

}  // namespace veq::chem
