// SPDX-License-Identifier: MIT
// The fitter's hot path: charge balance and ionic strength with their x and L slopes in double, and a warm Newton
// solve.
//
// The same equations as chem::charge_balance (DEVELOPERS.md, "Chemistry model"),
// laid out for speed: the fitter solves every reading again for every
// parameter set, starting from the previous set's solution, so a plain 2x2
// Newton step on (x, L) replaces the bracketing solver there (the bracketing
// solver remains the fallback). tests/fit checks these values against
// chem::charge_balance and the solutions against chem::Titration.
#pragma once

#include <array>
#include <cmath>
#include <cstddef>

#include "veq/chem/equilibrium.hpp"
#include "veq/chem/model.hpp"

namespace veq::fit::detail {

// F (charge balance), I (ionic strength) and their partial derivatives in
// x = log10 [H+] and L = log10 gamma1 at one point.
struct BalancePoint {
  double F = 0.0, F_x = 0.0, F_L = 0.0;
  double I = 0.0, I_x = 0.0, I_L = 0.0;
};

inline constexpr std::size_t kMaxBalanceItems = 6;
// The constants of the balance: 5 fixed ones, then per item its concentration and its steps' ln K.
inline constexpr std::size_t kMaxBalanceConstants =
    5 + kMaxBalanceItems * (1 + static_cast<std::size_t>(chem::kMaxSteps));

// The model's constants as the balance uses them, in the scalar type T: double for FastBalance, Jets of the
// fit's chemical parameters for their derivatives (the fit's Jacobian, residual.cpp), one definition for both.
template <typename T>
struct BalanceConstants {
  struct Item {
    int steps = 1;
    int z0 = 0;
    bool titrant = false;
    T conc{};
    std::array<T, chem::kMaxSteps> K{};
  };
  T V0{}, fixed_charge_sample{}, fixed_ionic_sample{}, fixed_charge_titrant{}, fixed_ionic_titrant{}, Kw{};
  std::array<Item, kMaxBalanceItems> items{};
  std::size_t count = 0;

  explicit BalanceConstants(const chem::Model<T>& m) {
    using std::pow;
    V0 = m.sample_volume_mL;
    fixed_charge_sample = m.strong_base_mol_L - m.strong_acid_mol_L;
    fixed_ionic_sample = 0.5 * (m.strong_acid_mol_L + m.strong_base_mol_L) + m.background_ionic_strength_mol_L;
    fixed_charge_titrant = static_cast<double>(m.titrant_sign) * m.titrant_conc_mol_L;
    fixed_ionic_titrant = 0.5 * m.titrant_conc_mol_L;
    Kw = pow(10.0, -m.pKw);
    auto add = [&](const chem::Protolyte<T>& p, bool titrant) {
      if (count >= kMaxBalanceItems || p.steps < 1) return;
      Item& it = items[count++];
      it.steps = p.steps;
      it.z0 = p.top_charge;
      it.titrant = titrant;
      it.conc = p.conc_mol_L;
      for (int j = 0; j < p.steps; ++j)
        it.K[static_cast<std::size_t>(j)] = pow(10.0, -p.pKa[static_cast<std::size_t>(j)]);
      if (!titrant) {
        const double q_added = static_cast<double>(p.top_charge - p.added_form);
        fixed_charge_sample -= q_added * p.conc_mol_L;
        fixed_ionic_sample += 0.5 * std::fabs(q_added) * p.conc_mol_L;
      }
    };
    for (const auto& p : m.protolytes) add(p, false);
    if (m.titrant_carbonate.steps > 0 && m.titrant_carbonate.conc_mol_L > 0.0) add(m.titrant_carbonate, true);
  }

  // The constants in FastBalance::constant_slopes' order (ln K for the equilibrium constants); their number.
  std::size_t flatten(T* out) const {
    using std::log;
    std::size_t k = 0;
    out[k++] = fixed_charge_sample;
    out[k++] = fixed_ionic_sample;
    out[k++] = fixed_charge_titrant;
    out[k++] = fixed_ionic_titrant;
    out[k++] = log(Kw);
    for (std::size_t i = 0; i < count; ++i) {
      out[k++] = items[i].conc;
      for (int j = 0; j < items[i].steps; ++j) out[k++] = log(items[i].K[static_cast<std::size_t>(j)]);
    }
    return k;
  }
};

class FastBalance {
 public:
  static constexpr std::size_t kMaxItems = kMaxBalanceItems;

  explicit FastBalance(const chem::Model<double>& m) {
    const BalanceConstants<double> c(m);
    m_V0 = c.V0;
    m_fixed_charge_sample = c.fixed_charge_sample;
    m_fixed_ionic_sample = c.fixed_ionic_sample;
    m_fixed_charge_titrant = c.fixed_charge_titrant;
    m_fixed_ionic_titrant = c.fixed_ionic_titrant;
    m_Kw = c.Kw;
    m_activity = m.activity == chem::ActivityModel::davies;
    m_A = m.davies_A;
    m_b = m.davies_b;
    m_count = c.count;
    for (std::size_t i = 0; i < c.count; ++i) {
      Item& it = m_items[i];
      it.steps = c.items[i].steps;
      it.z0 = c.items[i].z0;
      it.titrant = c.items[i].titrant;
      it.conc = c.items[i].conc;
      it.K = c.items[i].K;
    }
  }

  [[nodiscard]] bool activity() const { return m_activity; }
  [[nodiscard]] double davies_A() const { return m_A; }
  [[nodiscard]] double davies_b() const { return m_b; }
  [[nodiscard]] double sample_volume_mL() const { return m_V0; }

  // The balance after volume_mL of titrant at (x, L).
  [[nodiscard]] BalancePoint eval(double volume_mL, double x, double L) const {
    return eval_diluted(m_V0 / (m_V0 + volume_mL), x, L);
  }

  // The same with the sample's dilution factor d = V0 / (V0 + V) given (Newton keeps V and so d).
  [[nodiscard]] BalancePoint eval_diluted(double d, double x, double L) const {
    constexpr double ln10 = 2.302585092994045684;
    const auto [e, h, q, inv_q, u, oh] = water(d, x, L);
    BalancePoint b;
    b.F = h - oh + d * m_fixed_charge_sample + e * m_fixed_charge_titrant;
    b.F_x = ln10 * (h + oh);
    b.F_L = 2.0 * ln10 * oh;
    b.I = 0.5 * (h + oh) + d * m_fixed_ionic_sample + e * m_fixed_ionic_titrant;
    b.I_x = 0.5 * ln10 * (h - oh);
    b.I_L = -ln10 * oh;
    for (std::size_t k = 0; k < m_count; ++k) {
      const Item& it = m_items[k];
      const std::array<double, chem::kMaxSteps + 1> a = fractions(it, q, inv_q, u);
      const double z0 = static_cast<double>(it.z0);
      double mj = 0.0, ms = 0.0, mq2 = 0.0;
      for (int j = 0; j <= it.steps; ++j) {
        const double jj = static_cast<double>(j);
        mj += jj * a[j];
        ms += (2.0 * jj * z0 - jj * (jj + 1.0)) * a[j];
        mq2 += (z0 - jj) * (z0 - jj) * a[j];
      }
      double var_j = 0.0, cov_js = 0.0, cov_jq2 = 0.0, cov_sq2 = 0.0;
      for (int j = 0; j <= it.steps; ++j) {
        const double jj = static_cast<double>(j);
        const double dj = jj - mj;
        const double ds = (2.0 * jj * z0 - jj * (jj + 1.0)) - ms;
        const double dq2 = (z0 - jj) * (z0 - jj) - mq2;
        var_j += a[j] * dj * dj;
        cov_js += a[j] * dj * ds;
        cov_jq2 += a[j] * dj * dq2;
        cov_sq2 += a[j] * ds * dq2;
      }
      const double c = (it.titrant ? e : d) * it.conc;
      b.F += c * (z0 - mj);
      b.F_x += ln10 * c * var_j;
      b.F_L -= ln10 * c * cov_js;
      b.I += 0.5 * c * mq2;
      b.I_x -= 0.5 * ln10 * c * cov_jq2;
      b.I_L += 0.5 * ln10 * c * cov_sq2;
    }
    return b;
  }

  // Davies residual G = L + A g(I) and its slopes, from a balance point.
  void davies(const BalancePoint& b, double L, double& G, double& G_x, double& G_L) const {
    const double I = b.I > 1e-300 ? b.I : 1e-300;
    // chem::davies_g and chem::davies_g_derivative, sharing one square root.
    const double sI = std::sqrt(I);
    const double one_s = 1.0 + sI;
    G = L + m_A * (sI / one_s - m_b * I);
    const double gp = m_A * (1.0 / (2.0 * sI * one_s * one_s) - m_b);
    G_x = gp * b.I_x;
    G_L = 1.0 + gp * b.I_L;
  }

  // dg/dI of Davies' function times A at ionic strength I (as davies() computes it).
  [[nodiscard]] double davies_slope(double I) const {
    I = I > 1e-300 ? I : 1e-300;
    const double sI = std::sqrt(I);
    const double one_s = 1.0 + sI;
    return m_A * (1.0 / (2.0 * sI * one_s * one_s) - m_b);
  }

  // The partial derivatives of F and I at (x, L) after volume_mL with respect to the constants, in
  // BalanceConstants::flatten's order (d/d ln K for the equilibrium constants): F and I are linear in the
  // fixed terms and the concentrations; a step's constant K_j multiplies the unnormalised fractions a_m of
  // every form m >= j, so d(mean of any f(m))/d ln K_j = sum over m >= j of f(m) a_m - (mean f) sum over
  // m >= j of a_m (the fractions normalised). Returns their number; I_out is I at the point.
  std::size_t constant_slopes(double volume_mL, double x, double L, double* dF, double* dI, double& I_out) const {
    const double d = m_V0 / (m_V0 + volume_mL);
    const auto [e, h, q, inv_q, u, oh] = water(d, x, L);
    std::size_t k = 0;
    dF[k] = d, dI[k++] = 0.0;
    dF[k] = 0.0, dI[k++] = d;
    dF[k] = e, dI[k++] = 0.0;
    dF[k] = 0.0, dI[k++] = e;
    dF[k] = -oh, dI[k++] = 0.5 * oh;  // oh = Kw / (q h): d/d ln Kw
    double I = 0.5 * (h + oh) + d * m_fixed_ionic_sample + e * m_fixed_ionic_titrant;
    for (std::size_t n = 0; n < m_count; ++n) {
      const Item& it = m_items[n];
      const std::array<double, chem::kMaxSteps + 1> a = fractions(it, q, inv_q, u);
      const double z0 = static_cast<double>(it.z0);
      double mj = 0.0, mq2 = 0.0;
      for (int j = 0; j <= it.steps; ++j) {
        const double jj = static_cast<double>(j);
        mj += jj * a[j];
        mq2 += (z0 - jj) * (z0 - jj) * a[j];
      }
      const double w = it.titrant ? e : d;
      const double c = w * it.conc;
      dF[k] = w * (z0 - mj), dI[k++] = 0.5 * w * mq2;
      // Tail sums over m >= j, from the top form down.
      std::array<double, chem::kMaxSteps + 1> P{}, Sm{}, Sq{};
      double p = 0.0, sm = 0.0, sq = 0.0;
      for (int m = it.steps; m >= 1; --m) {
        const double mm = static_cast<double>(m);
        p += a[m];
        sm += mm * a[m];
        sq += (z0 - mm) * (z0 - mm) * a[m];
        P[m] = p, Sm[m] = sm, Sq[m] = sq;
      }
      for (int j = 1; j <= it.steps; ++j) {
        dF[k] = -c * (Sm[j] - mj * P[j]);
        dI[k++] = 0.5 * c * (Sq[j] - mq2 * P[j]);
      }
      I += 0.5 * c * mq2;
    }
    I_out = I;
    return k;
  }

  // Newton on (x, L) (on x alone for an ideal solution) from the state in
  // eq, at volume_mL. On success eq holds the solution, jac the 2x2 Jacobian
  // there (F_x, F_L, G_x, G_L), and true is returned; false after
  // max_iterations or on a non-finite value (eq is then unchanged).
  // It stops once a step is below 1e-5 in x and L, after applying it:
  // convergence is quadratic there (the slope changes by a factor ln10 per
  // unit of x), so the error left is of order 1e-10 in pH, a millionth of a
  // good electrode's noise (1e-7 cost a second iteration at most readings
  // for no change a fit can show: DEVELOPERS.md, "Charge-balance fit").
  bool newton(double volume_mL,
              chem::Equilibrium& eq,
              chem::detail::BalanceJacobian& jac,
              int max_iterations = 16) const {
    double x = eq.log10_h;
    double L = m_activity ? eq.log10_gamma1 : 0.0;
    if (!std::isfinite(x) || !std::isfinite(L)) return false;
    const double dilution = m_V0 / (m_V0 + volume_mL);
    for (int it = 0; it < max_iterations; ++it) {
      const BalancePoint b = eval_diluted(dilution, x, L);
      double dx = 0.0, dL = 0.0;
      if (m_activity) {
        double G = 0.0, G_x = 0.0, G_L = 1.0;
        davies(b, L, G, G_x, G_L);
        const double det = b.F_x * G_L - b.F_L * G_x;
        if (!(std::fabs(det) > 0.0) || !std::isfinite(det)) return false;
        dx = -(G_L * b.F - b.F_L * G) / det;
        dL = -(b.F_x * G - G_x * b.F) / det;
        jac = {b.F_x, b.F_L, G_x, G_L};
      } else {
        if (!(b.F_x > 0.0) || !std::isfinite(b.F_x)) return false;
        dx = -b.F / b.F_x;
        jac = {b.F_x, 0.0, 0.0, 1.0};
      }
      // A step of more than one decade is not trusted to the linearisation.
      const double big = std::fmax(std::fabs(dx), std::fabs(dL));
      if (big > 1.0) {
        dx /= big;
        dL /= big;
      }
      x += dx;
      L += dL;
      if (!std::isfinite(x) || !std::isfinite(L) || x < -22.0 || x > 3.0) return false;
      if (std::fabs(dx) < 1e-5 && std::fabs(dL) < 1e-5) {
        eq.log10_h = x;
        eq.log10_gamma1 = L;
        eq.converged = true;
        eq.root_evaluations = it + 1;
        return true;
      }
    }
    return false;
  }

 private:
  struct Item {
    int steps = 1;
    int z0 = 0;
    bool titrant = false;
    double conc = 0.0;
    std::array<double, chem::kMaxSteps> K{};
  };

  // The terms every point needs: e = 1 - d, h = [H+] = 10^x, q = gamma1^2 = 10^(2L) (conditional
  // constants K'_j = K_j q^(z0 - j), Kw' = Kw / q), 1/q, u = 1/h and [OH-] = Kw' / h.
  struct Water {
    double e, h, q, inv_q, u, oh;
  };
  [[nodiscard]] Water water(double d, double x, double L) const {
    constexpr double ln10 = 2.302585092994045684;
    const double h = std::exp(ln10 * x);
    const double q = m_activity ? std::exp(2.0 * ln10 * L) : 1.0;
    const double inv_q = 1.0 / q;
    const double u = 1.0 / h;
    return {1.0 - d, h, q, inv_q, u, m_Kw * inv_q * u};
  }

  // The item's form fractions a_0..a_steps (normalised) at u = 1/[H+], with the conditional constants
  // K'_j = K_j q^(z0 - j): q^(z0 - 1) for the first step, divided by q for each further one.
  static std::array<double, chem::kMaxSteps + 1> fractions(const Item& it, double q, double inv_q, double u) {
    std::array<double, chem::kMaxSteps + 1> a{};
    a[0] = 1.0;
    double S = 1.0;
    double qp = it.z0 - 1 >= 0 ? ipow(q, it.z0 - 1) : ipow(inv_q, 1 - it.z0);
    for (int j = 1; j <= it.steps; ++j) {
      a[j] = a[j - 1] * it.K[j - 1] * qp * u;
      S += a[j];
      qp *= inv_q;
    }
    const double inv_S = 1.0 / S;
    for (int j = 0; j <= it.steps; ++j) a[j] *= inv_S;
    return a;
  }

  static double ipow(double q, int n) {
    double r = 1.0;
    const double base = n >= 0 ? q : 1.0 / q;
    for (int i = 0; i < (n >= 0 ? n : -n); ++i) r *= base;
    return r;
  }

  double m_V0 = 25.0;
  double m_fixed_charge_sample = 0.0;
  double m_fixed_ionic_sample = 0.0;
  double m_fixed_charge_titrant = 0.0;
  double m_fixed_ionic_titrant = 0.0;
  double m_Kw = 1e-14;
  bool m_activity = true;
  double m_A = 0.5085;
  double m_b = 0.3;
  std::array<Item, kMaxItems> m_items{};
  std::size_t m_count = 0;
};

}  // namespace veq::fit::detail
