// SPDX-License-Identifier: MIT
// The residual cost function: every reading's measured minus predicted value through the charge balance.
#pragma once

#include <ceres/cost_function.h>
#include <ceres/loss_function.h>

#include <array>
#include <vector>

#include "fit/balance.hpp"
#include "fit/layout.hpp"
#include "veq/chem/equilibrium.hpp"

namespace veq::fit::detail {

// Most free parameters one model has (triprotic or tetraprotic analyte, mV
// electrode, titer and carbonate).
inline constexpr int kMaxFree = 10;

// The readings a fit uses.
struct Observations {
  std::vector<double> volume_mL;
  std::vector<double> value;  // pH or mV
};

// Per reading, the solved state for the last parameter set evaluated: the
// warm start of the next evaluation (DEVELOPERS.md, "Charge-balance fit").
struct WarmStates {
  std::vector<chem::Equilibrium> state;
  std::vector<chem::detail::BalanceJacobian> jacobian;
  std::array<double, kMaxFree> u{};  // the scaled parameters they belong to
  bool valid = false;
  // The states' tangent at the last Jacobian (parameters tangent_u, states tangent_state): d x / d u and
  // d L / d u for each chemical parameter, (dx, dL) pairs, reading by reading. A new parameter set starts
  // each reading's Newton solve from the tangent's prediction, one iteration closer than the last state.
  std::vector<double> tangent;
  std::vector<chem::Equilibrium> tangent_state;
  std::vector<chem::detail::BalanceJacobian> tangent_jacobian;  // the states' 2x2 Jacobians there
  std::array<double, kMaxFree> tangent_u{};
  bool tangent_valid = false;
  long evaluations = 0;  // calls (for the benchmark)
  long jacobian_evaluations = 0;
  long solves = 0;              // point solves
  long newton_evaluations = 0;  // warm Newton iterations
  long fallbacks = 0;           // bracketed solves after Newton failed
};

// Jet widths 5, 7 and 9 cost more than 6, 8 and 10 (Eigen vectorises the
// even ones; measured for chem::charge_balance: 294 ns at 5, 220 ns at 6,
// 307 ns at 7, 254 ns at 8): derivative directions are padded to even widths
// (the model is now built once per Jacobian in Jets, no reading is).
[[nodiscard]] inline int padded_size(int k) {
  return (k >= 5 && k % 2 == 1) ? k + 1 : k;
}

// Measured minus predicted reading at every observation, times the square
// root of its weight. With a robust loss rho (Ceres' convention: rho of the
// squared residual), each weighted residual r is returned as
// sign(r) sqrt(rho(r^2)) and its Jacobian row scaled by rho'(r^2) r /
// sqrt(rho(r^2)): the sum of squares is then sum rho(r_i^2) and its gradient
// the robust one, so one least-squares solve minimises the robust cost
// (Triggs et al., "Bundle adjustment - a modern synthesis", 2000, section
// 4.3: the square-root form of a robust cost). One parameter block: the
// model's free parameters, scaled (Layout::value).
//
// The chemistry is solved in double by a warm Newton step (chem's bracketing
// solver as the fallback). Derivatives with respect to the chemical
// parameters (concentrations, pKa values, titer, carbonate) come through the
// root by the implicit function theorem, d(x, L)/du = -J^-1 d(F, G)/du at each
// reading's solution, with d(F, G)/du = the balance's slopes in its constants
// (FastBalance::constant_slopes, in double) times the constants' derivatives
// in u (BalanceConstants of the model built once in Ceres Jets of exactly that
// many directions); the electrode enters the prediction linearly
// (pH + offset, or E0 - slope x pH), so its columns are written directly:
// d/d offset = d/d E0 = -1, d/d slope = pH (times the scale and the weight).
// tests/fit checks the whole Jacobian against central differences.
//
// Never throws: a reading that cannot be solved makes the evaluation fail
// (false), which Ceres treats as a rejected step. Not thread-safe (the warm
// states are shared); the fitter runs one thread.
class CurveCost final : public ceres::CostFunction {
 public:
  // weights: one per observation, or null for 1; the values may change
  // between solves (they are read at every evaluation). loss: the robust
  // loss, or null for least squares (not owned; it must outlive the cost).
  CurveCost(const Layout* layout,
            const Observations* obs,
            WarmStates* warm,
            const std::vector<double>* weights = nullptr,
            const ceres::LossFunction* loss = nullptr);

  bool Evaluate(double const* const* parameters, double* residuals, double** jacobians) const override;

  // The unweighted residuals at u (no Jacobian). Never throws.
  bool residuals(const double* u, double* r) const;

 private:
  bool evaluate(const double* u, double* r, double* jacobian, bool weighted) const;

  const Layout* m_layout;
  const Observations* m_obs;
  WarmStates* m_warm;
  const std::vector<double>* m_weights;
  const ceres::LossFunction* m_loss;
  mutable std::vector<double> m_loss_slope;  // d(robust residual)/d(residual) at the last evaluation
  mutable std::vector<double> m_grad;        // d pH / d (chemical parameter) at the last Jacobian, by reading
  std::vector<int> m_chemical;               // free indices of the chemical parameters
};

}  // namespace veq::fit::detail
