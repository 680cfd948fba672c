// SPDX-License-Identifier: MIT
// pH at any added volume: the charge balance solved for log10 [H+] by bracketed root finding (TOMS 748), with
// Davies activity coefficients iterated to convergence; derivatives through the root by the implicit function
// theorem; and the closed form of volume as a function of pH.
#pragma once

#include <array>
#include <cmath>
#include <cstdint>
#include <limits>
#include <string>
#include <type_traits>
#include <utility>
#include <vector>

#include "veq/chem/model.hpp"

namespace veq::chem {

struct SolveOptions {
  // The bracketing solver (Boost.Math toms748_solve) stops when the bracket on
  // x = log10 [H+] is narrower than this [log10 units]; one Newton step inside
  // the bracket then brings x to machine precision.
  double log10_h_tolerance = 1e-12;
  // Most charge-balance evaluations for one root (bracketing included).
  int max_root_evaluations = 200;
  // The ionic-strength iteration stops when |L + A g(I)| is below this, L the
  // univalent log10 gamma [log10 units].
  double activity_tolerance = 1e-15;
  // Most ionic-strength iterations per point.
  int max_activity_iterations = 50;
  // Half-width of the first bracket around a warm start [log10 units]; it is
  // widened geometrically until the charge balance changes sign.
  double warm_half_width = 0.02;
  // Search range of x = log10 [H+] [log10 units]: 1e-22 to 1e3 mol/L.
  double min_log10_h = -22.0;
  double max_log10_h = 3.0;

  // One line per problem ("log10_h_tolerance = 0: must be in (0, 1e-3]"); empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// The solved state of the vessel at one point, in double.
struct Equilibrium {
  double log10_h = std::numeric_limits<double>::quiet_NaN();  // x = log10 [H+], [H+] in mol/L
  double log10_gamma1 = 0.0;                                  // L = log10 gamma of a univalent ion (0 when ideal)
  double ionic_strength_mol_L = 0.0;                          // I at the solution [mol/L]
  int root_evaluations = 0;                                   // charge-balance evaluations used
  int activity_iterations = 0;                                // ionic-strength iterations used (0 when ideal)
  bool converged = false;                                     // false: bracket not found or an iteration limit reached

  // pH = -log10 a(H+) = -(x + L).
  [[nodiscard]] double pH() const { return -(log10_h + log10_gamma1); }
};

// The solution at one point in the scalar type of the model: for a dual
// number the derivative parts come through the root (implicit function
// theorem), the value parts equal state's.
template <typename T>
struct Point {
  T pH = T(0.0);
  T log10_h = T(0.0);
  T log10_gamma1 = T(0.0);
  Equilibrium state;
};

namespace detail {

// The model in double, laid out for the hot loop of the root finder.
struct FastProtolyte {
  int steps = 1;
  int top_charge = 0;
  bool titrant = false;                     // part of the titrant (diluted by V/(V0+V)) rather than the sample
  double conc_mol_L = 0.0;                  // in the sample (or titrant) before mixing
  double counter_charge = 0.0;              // charge of the spectator ions per mole
  std::array<double, kMaxSteps> log10_K{};  // -pKa_j
};

struct FastModel {
  double sample_volume_mL = 25.0;
  double fixed_charge_sample = 0.0;   // spectator charge of the sample per unit dilution [mol/L]
  double fixed_ionic_sample = 0.0;    // spectator ionic strength of the sample, background included [mol/L]
  double fixed_charge_titrant = 0.0;  // sign * Ct
  double fixed_ionic_titrant = 0.0;   // Ct / 2
  double pKw = 13.995;
  bool activity = true;
  double davies_A = 0.5085;
  double davies_b = 0.3;
  std::vector<FastProtolyte> protolytes;
};

[[nodiscard]] FastModel make_fast_model(const Model<double>& m);

// Partial derivatives at the solution: F the charge balance, G = L + A g(I).
struct BalanceJacobian {
  double F_x = 0.0;
  double F_L = 0.0;
  double G_x = 0.0;
  double G_L = 1.0;
};

// Solves the point in double. warm may be null or hold a nearby solution.
[[nodiscard]] Equilibrium solve_fast(const FastModel& m,
                                     double volume_mL,
                                     const Equilibrium* warm,
                                     const SolveOptions& options,
                                     BalanceJacobian* jacobian);

}  // namespace detail

// A titration model ready to evaluate: pH at any volume, volume at any pH.
// Thread-compatible: const methods may run concurrently.
template <typename T>
class Titration {
 public:
  explicit Titration(Model<T> model, SolveOptions options = {})
      : m_model(std::move(model)), m_fast(detail::make_fast_model(model_cast<double>(m_model))), m_options(options) {}

  // The solution after volume_mL of titrant. warm: a nearby solution to start
  // from (for example the previous volume, or the same volume for the
  // previous parameter set), or null; when given it is replaced by the new
  // solution. Never throws; a point that did not converge has
  // state.converged == false.
  [[nodiscard]] Point<T> solve(const T& volume_mL, Equilibrium* warm = nullptr) const {
    detail::BalanceJacobian jac;
    const Equilibrium st = detail::solve_fast(m_fast, value_of(volume_mL), warm, m_options, &jac);
    if (warm != nullptr) *warm = st;
    Point<T> p;
    p.state = st;
    if constexpr (std::is_arithmetic_v<T>) {
      p.log10_h = st.log10_h;
      p.log10_gamma1 = st.log10_gamma1;
    } else {
      // Implicit function theorem: one Newton step in T at the converged
      // double solution (x0, L0) gives x(p), L(p) with exact first derivatives.
      const T x0 = T(st.log10_h);
      const T L0 = T(st.log10_gamma1);
      const BalanceValue<T> b = charge_balance(m_model, volume_mL, x0, L0);
      if (m_model.activity == ActivityModel::ideal) {
        p.log10_h = x0 - b.charge / jac.F_x;
        p.log10_gamma1 = T(0.0);
      } else {
        const T G = L0 + m_model.davies_A * davies_g(b.ionic_strength, m_model.davies_b);
        const double det = jac.F_x * jac.G_L - jac.F_L * jac.G_x;
        p.log10_h = x0 - (jac.G_L * b.charge - jac.F_L * G) / det;
        p.log10_gamma1 = L0 - (jac.F_x * G - jac.G_x * b.charge) / det;
      }
    }
    p.pH = -(p.log10_h + p.log10_gamma1);
    return p;
  }

  // pH after volume_mL of titrant (see solve()).
  [[nodiscard]] T pH(const T& volume_mL, Equilibrium* warm = nullptr) const { return solve(volume_mL, warm).pH; }

  // Titrant volume [mL] at which the vessel reads pH (closed form of the
  // charge balance solved for V: V = -V0 (S + W) / (C + W), W the water part,
  // S the sample part, C the titrant part at that pH). With activity, L is
  // iterated to a fixed point in T, so derivatives come along exactly.
  // Negative (or infinite) when the pH is not reached by adding titrant.
  [[nodiscard]] T volume_at_pH(const T& pH) const {
    T L = T(0.0);
    T volume = T(0.0);
    const bool ideal = m_model.activity == ActivityModel::ideal;
    int settled = 0;
    for (int it = 0; it < 200 && settled < 4; ++it) {
      const T x = -pH - L;
      const VesselParts<T> v = vessel_parts(m_model, x, L);
      const T w = v.water.charge;
      volume = -m_model.sample_volume_mL * (v.sample.charge + w) / (v.titrant.charge + w);
      if (ideal) break;
      const T d = sample_dilution(m_model, volume);
      const T I = v.water.ionic_strength + d * v.sample.ionic_strength + (1.0 - d) * v.titrant.ionic_strength;
      const T L_next = -m_model.davies_A * davies_g(I, m_model.davies_b);
      if (std::fabs(value_of(L_next) - value_of(L)) <= 1e-16 + 1e-15 * std::fabs(value_of(L))) ++settled;
      L = L_next;
    }
    return volume;
  }

  [[nodiscard]] const Model<T>& model() const { return m_model; }
  [[nodiscard]] const SolveOptions& options() const { return m_options; }

 private:
  Model<T> m_model;
  detail::FastModel m_fast;
  SolveOptions m_options;
};

extern template class Titration<double>;

// A curve point of the closed-form evaluation.
struct CurvePoint {
  double volume_mL = 0.0;
  double pH = 0.0;
};

// The titration curve by the closed form: V at n pH values evenly spaced
// from pH_from to pH_to (n >= 2), keeping the points with
// 0 <= V <= max_volume_mL, in order of volume. No root finding: the fast
// way to draw a curve or tabulate it densely near a jump.
[[nodiscard]] std::vector<CurvePoint> curve_by_pH(
    const Titration<double>& titration, double pH_from, double pH_to, std::size_t n, double max_volume_mL);

}  // namespace veq::chem
