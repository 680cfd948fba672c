// SPDX-License-Identifier: MIT
// The residual functor: every reading's measured minus predicted value, through the charge balance, robustly weighted.
#pragma once

#include <algorithm>
#include <array>
#include <cmath>
#include <optional>
#include <type_traits>
#include <vector>

#include <ceres/autodiff_cost_function.h>
#include <ceres/cost_function.h>

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
  long evaluations = 0;         // calls (for the benchmark)
  long jacobian_evaluations = 0;
  long solves = 0;              // point solves
  long newton_evaluations = 0;  // warm Newton iterations
  long fallbacks = 0;           // bracketed solves after Newton failed
};

// Measured minus predicted reading at every observation, times the square
// root of its weight (the robust loss enters through weights: iteratively
// reweighted least squares, see fit.cpp). The chemistry is solved in double by a warm Newton step
// (chem's bracketing solver as the fallback); for a Jet the derivatives then
// come through the root by one Newton step in T (implicit function theorem),
// as in chem::Titration::solve. Never throws: a point that cannot be solved
// makes the evaluation fail (return false), which Ceres treats as a rejected
// step. Not thread-safe (the warm states are shared); the fitter runs one thread.
class CurveResidual {
 public:
  // weights: one per observation, or null for 1. The pointed-to values may
  // change between solves (they are read at every evaluation).
  CurveResidual(const Layout* layout, const Observations* obs, WarmStates* warm, const std::vector<double>* weights = nullptr)
      : m_layout(layout), m_obs(obs), m_warm(warm), m_weights(weights) {}

  template <typename T>
  bool operator()(const T* u, T* residuals) const noexcept {
    try {
      return evaluate(u, residuals);
    } catch (...) {
      return false;
    }
  }

 private:
  template <typename T>
  bool evaluate(const T* u, T* residuals) const {
    const Layout& layout = *m_layout;
    const int k = layout.free_count;
    std::array<double, kMaxFree> ud{};
    for (int i = 0; i < k; ++i) {
      ud[static_cast<std::size_t>(i)] = chem::value_of(u[i]);
      if (!std::isfinite(ud[static_cast<std::size_t>(i)])) return false;
    }
    WarmStates& warm = *m_warm;
    ++warm.evaluations;
    if constexpr (!std::is_arithmetic_v<T>) ++warm.jacobian_evaluations;
    const bool same = warm.valid && std::equal(ud.begin(), ud.begin() + k, warm.u.begin());
    const chem::Model<double> md = layout.model(ud.data());
    const FastBalance fb(md);
    std::optional<chem::detail::FastModel> bracketing;
    const chem::SolveOptions solve_options;

    // The chemistry in T (derivative directions of u), built once per evaluation.
    std::optional<chem::Model<T>> mt;
    if constexpr (!std::is_arithmetic_v<T>) mt = layout.model(u);
    const T offset = electrode(u, Role::offset);
    const T e0 = electrode(u, Role::e0);
    const T slope = electrode(u, Role::slope);
    const bool ph_signal = layout.signal == SignalKind::ph;

    const std::size_t n = m_obs->volume_mL.size();
    for (std::size_t i = 0; i < n; ++i) {
      const double V = m_obs->volume_mL[i];
      chem::Equilibrium& st = warm.state[i];
      chem::detail::BalanceJacobian& jac = warm.jacobian[i];
      if (!same) {
        ++warm.solves;
        if (fb.newton(V, st, jac)) {
          warm.newton_evaluations += st.root_evaluations;
        } else {
          if (!bracketing) bracketing = chem::detail::make_fast_model(md);
          const chem::Equilibrium* start = st.converged ? &st : nullptr;
          chem::Equilibrium s2 = chem::detail::solve_fast(*bracketing, V, start, solve_options, &jac);
          if (!s2.converged) s2 = chem::detail::solve_fast(*bracketing, V, nullptr, solve_options, &jac);
          if (!s2.converged) {
            warm.valid = false;
            return false;
          }
          st = s2;
          ++warm.fallbacks;
        }
      }
      T pH;
      if constexpr (std::is_arithmetic_v<T>) {
        pH = -(st.log10_h + st.log10_gamma1);
      } else {
        const T x0 = T(st.log10_h);
        const T L0 = T(st.log10_gamma1);
        const chem::BalanceValue<T> b = chem::charge_balance(*mt, T(V), x0, L0);
        T x, L;
        if (!fb.activity()) {
          x = x0 - b.charge / jac.F_x;
          L = T(0.0);
        } else {
          const T G = L0 + mt->davies_A * chem::davies_g(b.ionic_strength, mt->davies_b);
          const double det = jac.F_x * jac.G_L - jac.F_L * jac.G_x;
          x = x0 - (jac.G_L * b.charge - jac.F_L * G) / det;
          L = L0 - (jac.F_x * G - jac.G_x * b.charge) / det;
        }
        pH = -(x + L);
      }
      const T predicted = ph_signal ? T(pH + offset) : T(e0 - slope * pH);
      const T r = T(m_obs->value[i]) - predicted;
      if (!std::isfinite(chem::value_of(r))) {
        warm.valid = false;
        return false;
      }
      residuals[i] = m_weights == nullptr ? r : T(r * std::sqrt((*m_weights)[i]));
    }
    std::copy(ud.begin(), ud.begin() + k, warm.u.begin());
    warm.valid = true;
    return true;
  }

  template <typename T>
  T electrode(const T* u, Role role) const {
    const ParamDef* p = m_layout->find(role);
    return p == nullptr ? T(0.0) : m_layout->value(*p, u);
  }

  const Layout* m_layout;
  const Observations* m_obs;
  WarmStates* m_warm;
  const std::vector<double>* m_weights;
};

// Jet widths 5, 7 and 9 cost more than 6, 8 and 10 (Eigen vectorises the
// even ones; measured for chem::charge_balance: 294 ns at 5, 220 ns at 6,
// 307 ns at 7, 254 ns at 8). The parameter block is padded to the even width;
// the padding is held constant by a ceres::SubsetManifold.
[[nodiscard]] inline int padded_size(int k) { return (k >= 5 && k % 2 == 1) ? k + 1 : k; }

// The automatic-differentiation cost function for a parameter block of size
// k (Jets of exactly that width) over n residuals. Takes ownership of functor.
template <typename Functor>
[[nodiscard]] ceres::CostFunction* autodiff_cost(Functor* functor, int k, int n) {
  switch (k) {
    case 1: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 1>(functor, n);
    case 2: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 2>(functor, n);
    case 3: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 3>(functor, n);
    case 4: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 4>(functor, n);
    case 5: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 5>(functor, n);
    case 6: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 6>(functor, n);
    case 7: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 7>(functor, n);
    case 8: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 8>(functor, n);
    case 9: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 9>(functor, n);
    case 10: return new ceres::AutoDiffCostFunction<Functor, ceres::DYNAMIC, 10>(functor, n);
    default: delete functor; return nullptr;
  }
}

}  // namespace veq::fit::detail
