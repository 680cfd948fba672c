// SPDX-License-Identifier: MIT
// Charge-balance fit of a whole titration curve: concentrations, pKa values, electrode, model selection, uncertainty.
//
// The model is the chemistry of include/veq/chem/ (charge balance, Davies
// activity, Kw(T)); the fitter is Ceres (Levenberg–Marquardt with bounds and a
// robust loss), kept private to src/fit/. DEVELOPERS.md, Science,
// "Charge-balance fit" gives every formula with its source.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "veq/chem/activity.hpp"
#include "veq/chem/model.hpp"
#include "veq/core/error.hpp"
#include "veq/core/run.hpp"
#include "veq/indicators/colour_change.hpp"
#include "veq/signal/endpoints.hpp"
#include "veq/signal/gran.hpp"

namespace veq::fit {

// The chemistry a fit assumes. Acid kinds are titrated with a base, base kinds
// with an acid. Concentrations are of the sample before any titrant; pKa values
// are thermodynamic (I -> 0) at the run's temperature, of the conjugate acid
// for bases.
enum class ModelKind {
  strong_acid,            // HX; parameter c
  weak_acid,              // HA; c, pKa1
  diprotic_acid,          // H2A; c, pKa1, pKa2
  triprotic_acid,         // H3A; c, pKa1..pKa3
  strong_weak_acid,       // HX + HA; c_strong, c, pKa1
  acid_salt,              // HA- added as its salt (KHP-type: one proton of H2A left); c, pKa1, pKa2
  strong_base,            // MOH; c
  weak_base,              // B (conjugate acid BH+); c, pKa1
  carbonate_base,         // A2- added as its salt (Na2CO3-type); c, pKa1, pKa2
  strong_weak_base,       // MOH + B; c_strong, c, pKa1
  hydroxide_carbonate,    // MOH + Na2CO3-type; c_strong, c, pKa1, pKa2
  carbonate_bicarbonate,  // Na2CO3 + NaHCO3-type (one acid, two salts): c, c_bicarbonate, pKa1, pKa2
  analyte,                // a substance of the analyte table (FitOptions::model names it); c, its pKa values
};

// "strong_acid", "weak_acid", ... ("analyte" for ModelKind::analyte).
[[nodiscard]] std::string_view to_string(ModelKind kind);
// The kind of a name, or nullopt (analyte names are not kinds).
[[nodiscard]] std::optional<ModelKind> model_kind_from_string(std::string_view name);
// Every kind but analyte, in declaration order.
[[nodiscard]] const std::vector<ModelKind>& model_kinds();

// The robust loss applied to each residual r (DEVELOPERS.md, "Charge-balance fit").
enum class LossKind {
  huber,   // rho(r^2) = r^2 for |r| <= delta, 2 delta |r| - delta^2 beyond: the default
  cauchy,  // rho(r^2) = delta^2 ln(1 + r^2/delta^2): redescending, stronger against gross outliers
  none,    // plain least squares
};
[[nodiscard]] std::string_view to_string(LossKind kind);  // "huber", "cauchy", "none"

// The information criterion that ranks candidate models.
enum class Criterion {
  aicc,  // AIC with the small-sample correction (Hurvich & Tsai 1989)
  bic,   // Schwarz's Bayesian criterion: the default (it picked the simulated chemistry in 199 of 200
         // accuracy-study runs, AICc in 192: AIC's smaller penalty lets a nested model with a spurious
         // component win by chance; DEVELOPERS.md, "Figures last measured")
};
[[nodiscard]] std::string_view to_string(Criterion c);  // "aicc", "bic"

struct FitOptions {
  // Run the fit at all (--no-fit sets false).
  bool enabled = true;
  // Which model: "" chooses among the candidates by the criterion, the
  // endpoint count as a hint; otherwise a ModelKind name ("diprotic_acid") or
  // a substance of the analyte table ("KHP", "phosphoric acid"), fitted alone.
  std::string model;
  // Free electrode parameters: the offset of a pH run (measured = model pH +
  // offset [pH]); E0 [mV] and slope [mV/pH] of an uncalibrated mV run
  // (E = E0 - slope x pH). false holds them at 0 (pH) or at the Nernst slope
  // and the E0 that fits best at the start (mV).
  bool fit_electrode = true;
  // Fit the titrant factor t (the titrant is t x its nominal concentration).
  // Only meaningful when the analyte amount is known: without
  // standard_amount_mmol the factor stays 1 and the result carries a warning.
  bool fit_titer = false;
  // Fit the fraction of a base titrant's hydroxide turned to carbonate by CO2
  // (chem::Titrant::carbonate_fraction) [-].
  bool fit_carbonate = false;
  // Amount of the primary standard in the vessel [mmol]: with fit_titer, holds
  // the analyte's concentration at amount / V0 (ignored without fit_titer:
  // then the concentration is fitted at the nominal titrant concentration).
  // Set by analyze() from a standardisation method (mass x purity / molar mass).
  std::optional<double> standard_amount_mmol;
  // Parameters held at a given value, by name ("pKa1" -> 2.95). Names as in
  // FitSummary::parameters: c, c_strong, pKa1..pKa4, offset, E0, slope, titer,
  // c_bicarbonate, carbonate_fraction. A name the chosen model lacks is an InputError.
  std::vector<std::pair<std::string, double>> hold;
  // Robust loss and its scale: delta = loss_scale x the reading noise SD
  // (Curve::noise_sd, floored at the resolution / sqrt(12)). At 3 SDs
  // 99.7 % of Gaussian residuals stay in the quadratic part, so the fit and
  // its covariance are those of least squares for clean data, while a spike
  // pulls no harder than a reading 3 SDs off (DEVELOPERS.md, "Charge-balance fit") [-].
  LossKind loss = LossKind::huber;
  double loss_scale = 3.0;
  // How candidate models are ranked.
  Criterion criterion = Criterion::bic;
  // Activity model of the fit (Davies, as the simulator, by default).
  chem::ActivityModel activity = chem::ActivityModel::davies;
  // Inert background electrolyte of the sample, as ionic strength [mol/L].
  double background_ionic_strength_mol_L = 0.0;
  // Solver limits: Levenberg–Marquardt iterations, and the relative changes
  // of cost (function), of the parameters (parameter) and the gradient's max
  // norm (gradient) below which it stops [-].
  int max_iterations = 100;
  double function_tolerance = 1e-12;
  double parameter_tolerance = 1e-12;
  double gradient_tolerance = 1e-14;
  // Runs test (Wald–Wolfowitz) on the residual signs: a one-sided p below this
  // (too few runs) flags residual_pattern [-].
  double runs_test_alpha = 0.01;
  // A residual SD above this many reading-noise SDs flags poor_fit [-].
  double max_residual_ratio = 3.0;
  // Curves with more readings are thinned to about this many, evenly by index [-].
  int max_points = 2000;
  // Model selection screens the candidates on this many readings (evenly by index) when the run has more
  // than 1.5 times as many; the best two are then fitted to all. 0: every candidate on all readings [-].
  int screen_points = 60;

  // One line per problem ("loss_scale = 0: must be > 0"); empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// What the fit needs beyond the curve; V0, Ct and the temperature are held fixed.
struct FitInputs {
  double sample_volume_mL = 0.0;               // V0 [mL]
  double titrant_conc_mol_L = 0.0;             // Ct, nominal [mol/L]
  TitrantKind titrant = TitrantKind::unknown;  // unknown: from the curve's direction
  double temperature_C = 25.0;                 // [°C]
};

// Stable flag strings of a fit (JSON flags[], tests).
inline constexpr const char* kFlagNotConverged = "not_converged";          // the solver stopped without converging
inline constexpr const char* kFlagAtBound = "at_bound";                    // a free parameter ended on its bound
inline constexpr const char* kFlagCovarianceFailed = "covariance_failed";  // parameters not all identifiable
inline constexpr const char* kFlagResidualPattern = "residual_pattern";    // runs test: the model misses a shape
inline constexpr const char* kFlagPoorFit = "poor_fit";                    // residual SD well above the noise
inline constexpr const char* kFlagAmbiguous = "ambiguous_model";           // runner-up within 2 criterion units
// Two titrated steps closer than the curve can tell from one step (the model's concentration is then a
// half or a third of what one step would say: not determined by the readings).
inline constexpr const char* kFlagStepsMerged = "steps_merged";
inline constexpr const char* kFlagSkipped = "skipped";  // not run (facts missing, too few points)
inline constexpr const char* kFlagFailed = "failed";    // no candidate could be fitted

// One fitted (or held) parameter.
struct Parameter {
  std::string name;  // "c", "pKa1", "offset", ...
  std::string unit;  // "mol/L", "", "pH", "mV", "mV/pH"
  double value = 0.0;
  bool fixed = false;               // held, not fitted (no std_error then)
  std::optional<double> std_error;  // from the scaled covariance
  std::optional<double> ci95_low;   // value -+ t(0.975, n - p) x std_error
  std::optional<double> ci95_high;
  double lower_bound = 0.0;  // the box the solver kept it in
  double upper_bound = 0.0;
};

// A fitted equivalence point: from the fitted concentrations,
// V_k = V0 (c_strong + k c) / (t Ct), with its propagated standard uncertainty.
struct FittedEquivalence {
  double volume_mL = 0.0;                // [mL]
  std::optional<double> uncertainty_mL;  // [mL]
  bool in_range = true;                  // inside the measured volumes
  int endpoint_index = 0;                // signal::Endpoint::index it matches (1-based); 0 for none
};

// Residual-pattern statistics.
struct ResidualTests {
  int runs = 0;                // sign runs of the residuals in volume order
  double expected_runs = 0.0;  // 2 n+ n- / n + 1
  double runs_z = 0.0;         // (runs - expected) / SD
  double runs_p = 1.0;         // one-sided P(fewer runs) under independence
  bool runs_tested = false;    // false below 10 signs, or when the residual scale is below 0.1 noise SD
  double durbin_watson = 2.0;  // sum (e_i - e_(i-1))^2 / sum e_i^2
};

// How the chemistry was solved during one fit (for benchmarks and bug reports).
struct SolverStats {
  long evaluations = 0;  // residual evaluations (with or without the Jacobian)
  long jacobian_evaluations = 0;
  long point_solves = 0;         // readings solved again for a new parameter set
  long newton_iterations = 0;    // warm Newton iterations over all of them
  long bracketed_fallbacks = 0;  // solves that needed the bracketing solver
};

// What the solver did (Ceres termination, as text).
enum class FitStatus {
  not_run,    // disabled, or skipped for missing facts
  failed,     // the solver could not produce a usable solution
  converged,  // the solver converged (check the flags before use)
  stopped,    // iteration limit reached; the solution is the last iterate
};
[[nodiscard]] std::string_view to_string(FitStatus s);  // "not_run", "failed", "converged", "stopped"

// One fitted model.
struct FitSummary {
  std::string model;  // kind name, or the analyte's name
  ModelKind kind = ModelKind::weak_acid;
  FitStatus status = FitStatus::not_run;
  std::string termination;  // Ceres' termination type and message
  int iterations = 0;
  SolverStats solver;
  int points = 0;  // readings fitted
  int free_parameters = 0;
  double cost = 0.0;         // 1/2 sum rho(r_i^2) at the solution [signal unit^2]
  double residual_sd = 0.0;  // sqrt(sum r_i^2 / (n - p)) [signal unit]
  double scale_sd = 0.0;     // the M-estimate scale that multiplies the covariance [signal unit]
  double aicc = 0.0;
  double bic = 0.0;
  double score = 0.0;                  // the criterion used (bic or aicc)
  SignalKind signal = SignalKind::ph;  // unit of the residuals
  std::vector<Parameter> parameters;
  std::vector<std::vector<double>> correlation;  // between the free parameters, in parameters order
  std::vector<std::string> correlation_names;    // their names
  std::vector<FittedEquivalence> equivalence;
  ResidualTests residual_tests;
  std::vector<double> residuals;            // measured - model, per reading fitted [signal unit]
  std::vector<double> residual_volumes_mL;  // their volumes [mL]
  std::vector<double> model_values;         // the fitted model's signal there (measured - residual) [signal unit]
  std::vector<std::string> flags;
  // The fitted chemistry: pH(V) of the fitted model (the electrode excluded).
  chem::Model<double> chemistry;

  // Converged, every parameter off its bound, covariance computed, and the
  // residuals pass the pattern and size checks: fit for use beside the
  // endpoints (consensus, indicators, method results).
  [[nodiscard]] bool usable() const;
  // The parameter of that name, or null.
  [[nodiscard]] const Parameter* parameter(std::string_view name) const;
};

// A candidate's standing in the model selection.
struct ModelScore {
  std::string model;
  double score = 0.0;  // on `readings` readings: compare only scores on the same number
  int readings = 0;    // all the fitted readings, or the screening's thinning
  bool converged = false;
  int free_parameters = 0;
  double residual_sd = 0.0;
  // Why model selection passes it over whatever its score: "parameter_at_bound" (a free parameter on its
  // bound), "steps_merged" (two titrated steps too close for the curve to tell them from one),
  // "step_out_of_reach" (a titrated step's pKa more than 2 beyond the readings' pH), or "".
  std::string set_aside;
};

// The fit of one run: the chosen model, and how the candidates scored.
struct FitResult {
  FitStatus status = FitStatus::not_run;  // of the chosen model; not_run when not attempted
  std::string message;                    // why not run or failed ("" otherwise)
  Criterion criterion = Criterion::bic;
  std::optional<FitSummary> best;       // the chosen model
  std::vector<ModelScore> candidates;   // every candidate tried, best first
  std::optional<ModelScore> runner_up;  // the second best, when there was one
  std::vector<std::string> flags;       // skipped, failed (the model's own flags are in best)
  std::vector<Diagnostic> warnings;

  // best && best->usable().
  [[nodiscard]] bool usable() const;
};

// Fits the curve by the charge-balance model (DEVELOPERS.md, "Charge-balance
// fit"). Initial guesses come from the endpoints (consensus volumes), the Gran
// buffer pKa values and the half-equivalence pH. Never throws for curve
// content: a curve that cannot be fitted gives a result with status failed
// (or not_run) and flags saying why. Throws InputError for invalid options or
// an unknown model name.
[[nodiscard]] FitResult fit_titration(const Curve& curve,
                                      const FitInputs& inputs,
                                      const std::vector<signal::Endpoint>& endpoints,
                                      const std::vector<signal::GranEndpoint>& gran,
                                      const FitOptions& options = {});

// The fitted model as a pH curve for the indicator check: the model pH (no
// electrode offset) at every volume, knots at the curve's volumes.
[[nodiscard]] indicators::PhCurve fitted_curve(const FitSummary& fit, const Curve& curve);

// ---- statistics used by the fit (public for tests and reports) -----------------------------------------------

// Wald–Wolfowitz runs test on the signs of residuals (zeros skipped) and the
// Durbin–Watson statistic. Runs are tested from n >= 10 nonzero residuals.
[[nodiscard]] ResidualTests residual_tests(const std::vector<double>& residuals);

// Small-sample corrected AIC for n residuals with sum of squares rss and k
// parameters: n ln(rss/n) + 2k + 2k(k+1)/(n-k-1) (Hurvich & Tsai,
// Biometrika 76 (1989) 297). Precondition: n > k + 1, rss > 0.
[[nodiscard]] double aicc(double rss, int n, int k);
// BIC: n ln(rss/n) + k ln n (Schwarz, Ann. Stat. 6 (1978) 461).
[[nodiscard]] double bic(double rss, int n, int k);
// Two-sided 95 % Student t quantile t(0.975, dof) (Boost.Math); dof >= 1.
[[nodiscard]] double t_quantile_975(int dof);

}  // namespace veq::fit
