// SPDX-License-Identifier: MIT
// The fit's cost function: warm Newton solves in double, Jets through the root for the chemical parameters.
#include "fit/residual.hpp"

#include <ceres/jet.h>

#include <algorithm>
#include <cmath>
#include <optional>

namespace veq::fit::detail {
namespace {

bool is_chemical(Role r) {
  return r == Role::c_strong || r == Role::c || r == Role::c_second || r == Role::pKa || r == Role::titer ||
         r == Role::carbonate;
}

// d pH / d u for the chemical parameters at every reading (and the states' tangent, d x / d u and d L / d u),
// by the implicit function theorem at the converged (x0, L0) of each reading with the 2x2 Jacobian there:
// d(x, L)/du = -J^-1 d(F, G)/du. d(F, G)/du = the balance's slopes in its constants (in double,
// FastBalance::constant_slopes) times the constants' derivatives in u, from the model built once in Jets of
// width N (>= the number of chemical parameters), so no reading is evaluated in Jets.
template <int N>
void chemical_gradients(const Layout& layout,
                        const double* u,
                        const std::vector<int>& chemical,
                        const Observations& obs,
                        const WarmStates& warm,
                        const FastBalance& fb,
                        std::vector<double>& grad,
                        std::vector<double>& tangent) {
  using J = ceres::Jet<double, N>;
  std::array<J, kMaxFree> uj{};
  for (int f = 0; f < layout.free_count; ++f) uj[static_cast<std::size_t>(f)] = J(u[f]);
  for (std::size_t c = 0; c < chemical.size(); ++c)
    uj[static_cast<std::size_t>(chemical[c])].v[static_cast<int>(c)] = 1.0;
  const chem::Model<J> mt = layout.model(uj.data());
  const BalanceConstants<J> constants(mt);
  std::array<J, kMaxBalanceConstants> flat{};
  const std::size_t np = constants.flatten(flat.data());
  const std::size_t nc = chemical.size();
  // The constants that move with the parameters (most do not: their rows are skipped).
  std::array<std::size_t, kMaxBalanceConstants> moving{};
  std::size_t nm = 0;
  for (std::size_t q = 0; q < np; ++q) {
    bool any = false;
    for (std::size_t c = 0; c < nc; ++c) any = any || flat[q].v[static_cast<int>(c)] != 0.0;
    if (any) moving[nm++] = q;
  }
  const bool activity = fb.activity();
  std::array<double, kMaxBalanceConstants> dF{}, dI{};
  for (std::size_t i = 0; i < obs.volume_mL.size(); ++i) {
    const chem::Equilibrium& st = warm.state[i];
    const chem::detail::BalanceJacobian& jac = warm.jacobian[i];
    double I = 0.0;
    fb.constant_slopes(obs.volume_mL[i], st.log10_h, st.log10_gamma1, dF.data(), dI.data(), I);
    const double gp = activity ? fb.davies_slope(I) : 0.0;
    const double det = jac.F_x * jac.G_L - jac.F_L * jac.G_x;
    for (std::size_t c = 0; c < nc; ++c) {
      double Fu = 0.0, Iu = 0.0;
      for (std::size_t m = 0; m < nm; ++m) {
        const double dq = flat[moving[m]].v[static_cast<int>(c)];
        Fu += dF[moving[m]] * dq;
        Iu += dI[moving[m]] * dq;
      }
      double dx = 0.0, dL = 0.0;
      if (!activity) {
        dx = -Fu / jac.F_x;
      } else {
        const double Gu = gp * Iu;
        dx = -(jac.G_L * Fu - jac.F_L * Gu) / det;
        dL = -(jac.F_x * Gu - jac.G_x * Fu) / det;
      }
      grad[i * nc + c] = -(dx + dL);
      tangent[2 * (i * nc + c)] = dx;
      tangent[2 * (i * nc + c) + 1] = dL;
    }
  }
}

}  // namespace

CurveCost::CurveCost(const Layout* layout,
                     const Observations* obs,
                     WarmStates* warm,
                     const std::vector<double>* weights,
                     const ceres::LossFunction* loss)
    : m_layout(layout), m_obs(obs), m_warm(warm), m_weights(weights), m_loss(loss) {
  set_num_residuals(static_cast<int>(obs->volume_mL.size()));
  mutable_parameter_block_sizes()->push_back(layout->free_count);
  for (const ParamDef& p : layout->params) {
    if (p.index >= 0 && is_chemical(p.role)) m_chemical.push_back(p.index);
  }
  std::sort(m_chemical.begin(), m_chemical.end());
}

bool CurveCost::Evaluate(double const* const* parameters, double* residuals, double** jacobians) const {
  try {
    return evaluate(parameters[0], residuals, jacobians != nullptr ? jacobians[0] : nullptr, true);
  } catch (...) {
    return false;
  }
}

bool CurveCost::residuals(const double* u, double* r) const {
  try {
    return evaluate(u, r, nullptr, false);
  } catch (...) {
    return false;
  }
}

bool CurveCost::evaluate(const double* u, double* r, double* jacobian, bool weighted) const {
  const Layout& layout = *m_layout;
  const int k = layout.free_count;
  if (k < 1 || k > kMaxFree) return false;
  for (int i = 0; i < k; ++i) {
    if (!std::isfinite(u[i])) return false;
  }
  WarmStates& warm = *m_warm;
  ++warm.evaluations;
  if (jacobian != nullptr) ++warm.jacobian_evaluations;
  bool same = warm.valid && std::equal(u, u + k, warm.u.begin());
  const std::size_t n = m_obs->volume_mL.size();
  // Back at the parameters of the last Jacobian (Ceres ends on them after rejecting a last trial step, so the
  // residuals at the solution are asked for there): its states are the solution, kept with the tangent.
  if (!same && warm.tangent_valid && warm.tangent_state.size() == n && warm.tangent_jacobian.size() == n &&
      std::equal(u, u + k, warm.tangent_u.begin())) {
    warm.state = warm.tangent_state;
    warm.jacobian = warm.tangent_jacobian;
    std::copy(u, u + k, warm.u.begin());
    warm.valid = true;
    same = true;
  }
  const chem::Model<double> md = layout.model(u);
  const FastBalance fb(md);
  std::optional<chem::detail::FastModel> bracketing;
  const chem::SolveOptions solve_options;

  if (!same) {
    const std::size_t nc = m_chemical.size();
    const bool predict =
        warm.tangent_valid && nc > 0 && warm.tangent.size() == 2 * n * nc && warm.tangent_state.size() == n;
    std::array<double, kMaxFree> du{};
    for (std::size_t c = 0; c < nc && predict; ++c) {
      const auto f = static_cast<std::size_t>(m_chemical[c]);
      du[c] = u[f] - warm.tangent_u[f];
    }
    for (std::size_t i = 0; i < n; ++i) {
      const double V = m_obs->volume_mL[i];
      chem::Equilibrium& st = warm.state[i];
      chem::detail::BalanceJacobian& jac = warm.jacobian[i];
      ++warm.solves;
      if (predict) {
        chem::Equilibrium guess = warm.tangent_state[i];
        const double* t = &warm.tangent[2 * i * nc];
        for (std::size_t c = 0; c < nc; ++c) {
          guess.log10_h += t[2 * c] * du[c];
          guess.log10_gamma1 += t[2 * c + 1] * du[c];
        }
        if (fb.newton(V, guess, jac)) {
          st = guess;
          warm.newton_evaluations += st.root_evaluations;
          continue;
        }
      }
      if (fb.newton(V, st, jac)) {
        warm.newton_evaluations += st.root_evaluations;
        continue;
      }
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
    std::copy(u, u + k, warm.u.begin());
    warm.valid = true;
  }

  // The electrode: pH + offset, or E0 - slope x pH.
  const ParamDef* offset = layout.find(Role::offset);
  const ParamDef* e0 = layout.find(Role::e0);
  const ParamDef* slope = layout.find(Role::slope);
  const bool ph_signal = layout.signal == SignalKind::ph;
  const double offset_v = offset != nullptr ? layout.value(*offset, u) : 0.0;
  const double e0_v = e0 != nullptr ? layout.value(*e0, u) : 0.0;
  const double slope_v = slope != nullptr ? layout.value(*slope, u) : 0.0;
  const bool use_weights = weighted && m_weights != nullptr;
  for (std::size_t i = 0; i < n; ++i) {
    const double pH = warm.state[i].pH();
    const double predicted = ph_signal ? pH + offset_v : e0_v - slope_v * pH;
    const double sw = use_weights ? std::sqrt((*m_weights)[i]) : 1.0;
    r[i] = sw * (m_obs->value[i] - predicted);
    if (!std::isfinite(r[i])) return false;
  }
  const bool robust = weighted && m_loss != nullptr;
  if (robust) {
    m_loss_slope.resize(n);
    for (std::size_t i = 0; i < n; ++i) {
      double rho[3];
      const double s = r[i] * r[i];
      m_loss->Evaluate(s, rho);
      const double root = std::sqrt(std::max(rho[0], 0.0));
      // Near r = 0, rho(s) = rho'(0) s: the slope tends to sqrt(rho'(0)).
      m_loss_slope[i] = root > 1e-150 ? rho[1] * std::fabs(r[i]) / root : std::sqrt(std::max(rho[1], 0.0));
      r[i] = std::copysign(root, r[i]);
      if (!std::isfinite(r[i]) || !std::isfinite(m_loss_slope[i])) return false;
    }
  }
  if (jacobian == nullptr) return true;

  std::fill(jacobian, jacobian + n * static_cast<std::size_t>(k), 0.0);
  const std::size_t nc = m_chemical.size();
  // Every entry of both is written below (no zeroing; kept between calls, so no allocation either).
  std::vector<double>& grad = m_grad;
  grad.resize(n * nc);
  // At the parameters of the last Jacobian (a new solve starts where the last one ended: the robust stage
  // after least squares, a refit after the screening), that Jacobian's tangent gives the gradients as
  // chemical_gradients computed them, d pH/du = -(dx/du + dL/du), and the states are its states.
  const bool at_tangent =
      nc > 0 && warm.tangent_valid && warm.tangent.size() == 2 * n * nc && std::equal(u, u + k, warm.tangent_u.begin());
  if (at_tangent) {
    for (std::size_t q = 0; q < n * nc; ++q) grad[q] = -(warm.tangent[2 * q] + warm.tangent[2 * q + 1]);
  } else {
    warm.tangent.resize(2 * n * nc);
    warm.tangent_valid = false;  // until the new tangent is complete
  }
  if (nc > 0 && !at_tangent) {
    switch (padded_size(static_cast<int>(nc))) {
      case 1:
        chemical_gradients<1>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 2:
        chemical_gradients<2>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 3:
        chemical_gradients<3>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 4:
        chemical_gradients<4>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 6:
        chemical_gradients<6>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 8:
        chemical_gradients<8>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      case 10:
        chemical_gradients<10>(layout, u, m_chemical, *m_obs, warm, fb, grad, warm.tangent);
        break;
      default:
        return false;
    }
    warm.tangent_state = warm.state;
    warm.tangent_jacobian = warm.jacobian;
    std::copy(u, u + k, warm.tangent_u.begin());
    warm.tangent_valid = true;
  }
  const double dpred_dpH = ph_signal ? 1.0 : -slope_v;
  for (std::size_t i = 0; i < n; ++i) {
    const double sw = (use_weights ? std::sqrt((*m_weights)[i]) : 1.0) * (robust ? m_loss_slope[i] : 1.0);
    double* row = jacobian + i * static_cast<std::size_t>(k);
    for (std::size_t c = 0; c < nc; ++c) row[m_chemical[c]] = -sw * dpred_dpH * grad[i * nc + c];
    if (ph_signal) {
      if (offset != nullptr && offset->index >= 0) row[offset->index] = -sw * offset->scale;
    } else {
      if (e0 != nullptr && e0->index >= 0) row[e0->index] = -sw * e0->scale;
      if (slope != nullptr && slope->index >= 0) row[slope->index] = sw * warm.state[i].pH() * slope->scale;
    }
    for (int f = 0; f < k; ++f) {
      if (!std::isfinite(row[f])) return false;
    }
  }
  return true;
}

}  // namespace veq::fit::detail
