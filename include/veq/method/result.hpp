// SPDX-License-Identifier: MIT
// Reportable results: the method's formula, a GUM uncertainty budget, the spec verdict.
#pragma once

#include <optional>
#include <string>
#include <vector>

#include "veq/core/run.hpp"
#include "veq/method/method.hpp"
#include "veq/method/titer.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/gran.hpp"

namespace veq::method {

// Inputs of one result formula, each with its standard uncertainty.
struct FormulaInputs {
  ResultUnit unit = ResultUnit::mol_L;
  double volume_mL = 0, volume_u_mL = 0;        // endpoint volume V
  double burette_u_mL = 0;                      // burette tolerance / sqrt(3), on V
  double blank_mL = 0, blank_u_mL = 0;          // Vb
  double conc_mol_L = 0, conc_u_mol_L = 0;      // titrant Ct
  double titer = 1, titer_u = 0;                // t
  double equivalents = 1;                       // titrant eq/mol (normality N = Ct t eq)
  double stoichiometry = 1;                     // nu, mol analyte (or standard) per mol titrant
  double molar_mass_g_mol = 0, molar_mass_u_g_mol = 0;  // analyte, or the standard
  double sample_volume_mL = 0, sample_volume_u_mL = 0;
  double sample_mass_g = 0, sample_mass_u_g = 0;        // sample, or the standard
  double purity = 1, purity_u = 0;              // standard (standardisation)
};

// One line of the uncertainty budget (first-order, GUM JCGM 100:2008 §5.1).
struct BudgetItem {
  std::string name;              // "endpoint volume", "burette", ...
  std::string unit;              // of value and std_uncertainty
  double value = 0;
  double std_uncertainty = 0;
  double sensitivity = 0;        // dR/dx
  double contribution = 0;       // |dR/dx| u(x), in result units
  double percent = 0;            // share of u(R)^2 [%]
};

// The result value and its budget; u_combined is sqrt(sum contribution^2).
[[nodiscard]] double formula_value(const FormulaInputs& in);
[[nodiscard]] std::vector<BudgetItem> uncertainty_budget(const FormulaInputs& in, double& u_combined);
[[nodiscard]] std::string formula_text(ResultUnit unit);

struct Result {
  std::string name;
  ResultUnit unit = ResultUnit::mol_L;
  double value = 0;
  double uncertainty = 0;          // standard uncertainty [result unit]
  double expanded_uncertainty = 0; // k = 2
  int decimals = 2;                // for display
  std::string formula;
  std::optional<double> spec_low, spec_high;
  std::string verdict;             // "pass", "fail", "borderline", or "" without limits
  int endpoint_index = 0;          // 0 for a fixed-pH endpoint
  std::optional<double> at_pH;
  double endpoint_volume_mL = 0;
  std::string volume_source;       // consensus, derivative, gran, fit, fixed_pH
  std::vector<BudgetItem> budget;
  std::vector<std::string> notes;
};

struct ResultSet {
  std::vector<Result> results;
  std::vector<std::string> acceptance_failures;  // e.g. too few endpoints
  std::vector<std::string> conflicts;            // the method and the run disagree about a fact (the method's is used)
  std::optional<TiterRecord> titer;              // for a standardisation
  std::string method_name;
  std::string method_path;
};

// An endpoint's equivalence volume from the charge-balance fit.
struct FittedVolume {
  double volume_mL = 0.0;
  double uncertainty_mL = 0.0;  // standard uncertainty [mL]
};

// Computes every result of the method for one analysed run. fitted holds,
// per endpoint (same order), the fit's volume when the fit is usable and
// matches it (empty: no usable fit). Throws InputError (naming the method
// file, line and key, or the missing run fact) when the method asks for
// something the run cannot give.
[[nodiscard]] ResultSet compute_results(const Method& method, const Run& run, const Curve& curve,
                                        const std::vector<signal::Endpoint>& endpoints,
                                        const std::vector<signal::GranEndpoint>& gran,
                                        const std::vector<std::optional<FittedVolume>>& fitted = {});

}  // namespace veq::method
