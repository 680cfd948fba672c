// SPDX-License-Identifier: MIT
// The hot path: charge balance in double, TOMS 748 in log10 [H+], Newton on the Davies fixed point.
#include "veq/chem/equilibrium.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <boost/math/tools/toms748_solve.hpp>
#include <cmath>

namespace veq::chem {

template class Titration<double>;

std::vector<std::string> SolveOptions::validate() const {
  std::vector<std::string> p;
  if (!(log10_h_tolerance > 0.0 && log10_h_tolerance <= 1e-3))
    p.push_back(fmt::format("log10_h_tolerance = {}: must be in (0, 1e-3]", log10_h_tolerance));
  if (max_root_evaluations < 10)
    p.push_back(fmt::format("max_root_evaluations = {}: must be at least 10", max_root_evaluations));
  if (!(activity_tolerance > 0.0 && activity_tolerance <= 1e-6))
    p.push_back(fmt::format("activity_tolerance = {}: must be in (0, 1e-6]", activity_tolerance));
  if (max_activity_iterations < 1)
    p.push_back(fmt::format("max_activity_iterations = {}: must be at least 1", max_activity_iterations));
  if (!(warm_half_width > 0.0 && warm_half_width <= 5.0))
    p.push_back(fmt::format("warm_half_width = {}: must be in (0, 5]", warm_half_width));
  if (!(min_log10_h < max_log10_h) || !std::isfinite(min_log10_h) || !std::isfinite(max_log10_h))
    p.push_back(fmt::format("min_log10_h = {}, max_log10_h = {}: need finite min < max", min_log10_h, max_log10_h));
  return p;
}

std::vector<CurvePoint> curve_by_pH(
    const Titration<double>& titration, double pH_from, double pH_to, std::size_t n, double max_volume_mL) {
  std::vector<CurvePoint> out;
  if (n < 2) return out;
  out.reserve(n);
  for (std::size_t i = 0; i < n; ++i) {
    const double pH = pH_from + (pH_to - pH_from) * static_cast<double>(i) / static_cast<double>(n - 1);
    const double v = titration.volume_at_pH(pH);
    if (std::isfinite(v) && v >= 0.0 && v <= max_volume_mL) out.push_back({v, pH});
  }
  std::sort(out.begin(), out.end(), [](const CurvePoint& a, const CurvePoint& b) { return a.volume_mL < b.volume_mL; });
  return out;
}

namespace detail {

FastModel make_fast_model(const Model<double>& m) {
  FastModel f;
  f.sample_volume_mL = m.sample_volume_mL;
  f.fixed_charge_sample = m.strong_base_mol_L - m.strong_acid_mol_L;
  f.fixed_ionic_sample = 0.5 * (m.strong_acid_mol_L + m.strong_base_mol_L) + m.background_ionic_strength_mol_L;
  f.fixed_charge_titrant = static_cast<double>(m.titrant_sign) * m.titrant_conc_mol_L;
  f.fixed_ionic_titrant = 0.5 * m.titrant_conc_mol_L;
  f.pKw = m.pKw;
  f.activity = m.activity == ActivityModel::davies;
  f.davies_A = m.davies_A;
  f.davies_b = m.davies_b;
  auto add = [&](const Protolyte<double>& p, bool titrant) {
    assert(p.steps >= 1 && p.steps <= kMaxSteps);
    FastProtolyte q;
    q.steps = p.steps;
    q.top_charge = p.top_charge;
    q.titrant = titrant;
    q.conc_mol_L = p.conc_mol_L;
    q.counter_charge = titrant ? 0.0 : -static_cast<double>(p.top_charge - p.added_form);
    for (int j = 0; j < p.steps; ++j) q.log10_K[j] = -p.pKa[j];
    if (!titrant) {
      f.fixed_charge_sample += q.counter_charge * p.conc_mol_L;
      f.fixed_ionic_sample += 0.5 * std::fabs(q.counter_charge) * p.conc_mol_L;
    }
    f.protolytes.push_back(q);
  };
  for (const auto& p : m.protolytes) add(p, false);
  if (m.titrant_carbonate.steps > 0 && m.titrant_carbonate.conc_mol_L > 0.0) add(m.titrant_carbonate, true);
  return f;
}

namespace {

constexpr double kLn10 = constants::kLn10;

// The model at one volume and one L: conditional constants and concentrations in the vessel.
struct PointWork {
  struct Item {
    int steps;
    int top_charge;
    double conc;                      // in the vessel [mol/L]
    std::array<double, kMaxSteps> K;  // conditional K'_j
  };
  std::array<Item, 16> small;  // no allocation for up to 16 systems
  std::vector<Item> large;
  Item* items = nullptr;
  std::size_t count = 0;
  double fixed_charge = 0.0;
  double fixed_ionic = 0.0;
  double Kw = 0.0;  // conditional Kw' = Kw / gamma1^2

  void setup(const FastModel& m, double volume_mL) {
    const double d = m.sample_volume_mL / (m.sample_volume_mL + volume_mL);
    const double e = 1.0 - d;
    fixed_charge = d * m.fixed_charge_sample + e * m.fixed_charge_titrant;
    fixed_ionic = d * m.fixed_ionic_sample + e * m.fixed_ionic_titrant;
    count = m.protolytes.size();
    if (count > small.size()) {
      large.resize(count);
      items = large.data();
    } else {
      items = small.data();
    }
    for (std::size_t k = 0; k < count; ++k) {
      const FastProtolyte& p = m.protolytes[k];
      items[k].steps = p.steps;
      items[k].top_charge = p.top_charge;
      items[k].conc = (p.titrant ? e : d) * p.conc_mol_L;
    }
  }

  void set_gamma(const FastModel& m, double L) {
    Kw = std::exp(kLn10 * (-m.pKw - 2.0 * L));
    for (std::size_t k = 0; k < count; ++k) {
      const FastProtolyte& p = m.protolytes[k];
      for (int j = 0; j < p.steps; ++j) {
        items[k].K[j] = std::exp(kLn10 * (p.log10_K[j] + 2.0 * L * static_cast<double>(p.top_charge - j - 1)));
      }
    }
  }

  // The charge balance F(x) at the current L [mol/L]; increasing in x.
  [[nodiscard]] double charge(double x) const {
    const double h = std::exp(kLn10 * x);
    const double u = 1.0 / h;
    double F = h - Kw * u + fixed_charge;
    for (std::size_t k = 0; k < count; ++k) {
      const Item& it = items[k];
      double t = 1.0, S = 1.0, S1 = 0.0;
      for (int j = 0; j < it.steps; ++j) {
        t *= it.K[j] * u;
        S += t;
        S1 += static_cast<double>(j + 1) * t;
      }
      F += it.conc * (static_cast<double>(it.top_charge) - S1 / S);
    }
    return F;
  }

  // F and dF/dx at x.
  void charge_and_slope(double x, double& F, double& F_x) const {
    const double h = std::exp(kLn10 * x);
    const double u = 1.0 / h;
    F = h - Kw * u + fixed_charge;
    double slope = h + Kw * u;
    for (std::size_t k = 0; k < count; ++k) {
      const Item& it = items[k];
      std::array<double, kMaxSteps + 1> a;
      double t = 1.0, S = 1.0;
      a[0] = 1.0;
      for (int j = 0; j < it.steps; ++j) {
        t *= it.K[j] * u;
        a[j + 1] = t;
        S += t;
      }
      double nbar = 0.0;
      for (int j = 1; j <= it.steps; ++j) nbar += static_cast<double>(j) * a[j];
      nbar /= S;
      double var = 0.0;
      for (int j = 0; j <= it.steps; ++j) {
        const double dj = static_cast<double>(j) - nbar;
        var += dj * dj * a[j];
      }
      var /= S;
      F += it.conc * (static_cast<double>(it.top_charge) - nbar);
      slope += it.conc * var;
    }
    F_x = kLn10 * slope;
  }

  // Everything the activity iteration and the implicit function theorem need at (x, L).
  struct Moments {
    double F = 0.0, F_x = 0.0, F_L = 0.0;
    double I = 0.0, I_x = 0.0, I_L = 0.0;
  };
  [[nodiscard]] Moments moments(double x) const {
    Moments mo;
    const double h = std::exp(kLn10 * x);
    const double oh = Kw / h;
    mo.F = h - oh + fixed_charge;
    mo.F_x = kLn10 * (h + oh);
    mo.F_L = 2.0 * kLn10 * oh;
    mo.I = 0.5 * (h + oh) + fixed_ionic;
    mo.I_x = 0.5 * kLn10 * (h - oh);
    mo.I_L = -kLn10 * oh;
    const double u = 1.0 / h;
    for (std::size_t k = 0; k < count; ++k) {
      const Item& it = items[k];
      std::array<double, kMaxSteps + 1> a;
      double t = 1.0, S = 1.0;
      a[0] = 1.0;
      for (int j = 0; j < it.steps; ++j) {
        t *= it.K[j] * u;
        a[j + 1] = t;
        S += t;
      }
      // Moments of j (protons lost), s_j = 2 j z0 - j (j + 1) (d ln beta_j / (ln10 dL)) and q_j^2.
      const double z0 = static_cast<double>(it.top_charge);
      double mj = 0.0, ms = 0.0, mq2 = 0.0;
      for (int j = 0; j <= it.steps; ++j) {
        const double jj = static_cast<double>(j);
        const double w = a[j] / S;
        a[j] = w;
        mj += jj * w;
        ms += (2.0 * jj * z0 - jj * (jj + 1.0)) * w;
        mq2 += (z0 - jj) * (z0 - jj) * w;
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
      const double c = it.conc;
      mo.F += c * (z0 - mj);
      mo.F_x += kLn10 * c * var_j;
      mo.F_L -= kLn10 * c * cov_js;
      mo.I += 0.5 * c * mq2;
      mo.I_x -= 0.5 * kLn10 * c * cov_jq2;
      mo.I_L += 0.5 * kLn10 * c * cov_sq2;
    }
    return mo;
  }
};

// Root of the charge balance in x at the current L, bracketed and solved by TOMS 748, then one Newton step.
bool solve_root(const PointWork& w, double guess, const SolveOptions& o, double& x_out, int& evaluations) {
  int evals = 0;
  auto f = [&](double x) {
    ++evals;
    return w.charge(x);
  };
  double lo = 0.0, hi = 0.0, flo = 0.0, fhi = 0.0;
  if (std::isfinite(guess)) {
    double width = o.warm_half_width;
    lo = std::max(o.min_log10_h, guess - width);
    hi = std::min(o.max_log10_h, guess + width);
    flo = f(lo);
    fhi = f(hi);
    // F increases with x: widen towards the side where the root lies.
    while (flo > 0.0 && lo > o.min_log10_h && evals < o.max_root_evaluations) {
      hi = lo;
      fhi = flo;
      width *= 4.0;
      lo = std::max(o.min_log10_h, lo - width);
      flo = f(lo);
    }
    while (fhi < 0.0 && hi < o.max_log10_h && evals < o.max_root_evaluations) {
      lo = hi;
      flo = fhi;
      width *= 4.0;
      hi = std::min(o.max_log10_h, hi + width);
      fhi = f(hi);
    }
  } else {
    lo = o.min_log10_h;
    hi = o.max_log10_h;
    flo = f(lo);
    fhi = f(hi);
  }
  if (!(flo <= 0.0 && fhi >= 0.0)) {  // also catches NaN
    evaluations += evals;
    return false;
  }
  double x = 0.0;
  if (flo == 0.0) {
    x = lo;
  } else if (fhi == 0.0) {
    x = hi;
  } else {
    const double tol = o.log10_h_tolerance;
    std::uintmax_t max_iter = static_cast<std::uintmax_t>(std::max(2, o.max_root_evaluations - evals));
    const auto r = boost::math::tools::toms748_solve(
        f, lo, hi, flo, fhi, [tol](double a, double b) { return std::fabs(b - a) <= tol; }, max_iter);
    lo = r.first;
    hi = r.second;
    x = 0.5 * (lo + hi);
    // Polish: one Newton step from inside a bracket narrower than tol
    // (quadratic convergence from there); kept only if it stays inside.
    double F = 0.0, F_x = 0.0;
    w.charge_and_slope(x, F, F_x);
    ++evals;
    if (F_x > 0.0) {
      const double xn = x - F / F_x;
      if (xn >= lo - tol && xn <= hi + tol) x = xn;
    }
    if (std::fabs(hi - lo) > 2.0 * tol) {
      evaluations += evals;
      x_out = x;
      return false;  // toms748 ran out of iterations
    }
  }
  evaluations += evals;
  x_out = x;
  return true;
}

}  // namespace

Equilibrium solve_fast(
    const FastModel& m, double volume_mL, const Equilibrium* warm, const SolveOptions& o, BalanceJacobian* jacobian) {
  Equilibrium st;
  PointWork w;
  w.setup(m, volume_mL);
  const bool have_warm = warm != nullptr && warm->converged && std::isfinite(warm->log10_h);
  double guess = have_warm ? warm->log10_h : std::numeric_limits<double>::quiet_NaN();
  int evals = 0;
  if (!m.activity) {
    w.set_gamma(m, 0.0);
    double x = 0.0;
    st.converged = solve_root(w, guess, o, x, evals);
    st.log10_h = x;
    st.log10_gamma1 = 0.0;
    const auto mo = w.moments(x);
    st.ionic_strength_mol_L = mo.I;
    st.root_evaluations = evals;
    if (jacobian != nullptr) *jacobian = {mo.F_x, 0.0, 0.0, 1.0};
    return st;
  }
  // Davies: L = -A g(I(x(L), L)), by Newton on Phi(L) = L + A g(I) with the
  // exact dPhi/dL = G_L - G_x F_L / F_x, falling back to the plain fixed-point
  // step when that slope is not safely positive.
  double L = have_warm ? warm->log10_gamma1 : -m.davies_A * davies_g(std::max(w.fixed_ionic, 1e-7), m.davies_b);
  double x = 0.0;
  PointWork::Moments mo;
  double G_x = 0.0, G_L = 1.0;
  bool ok = false;
  int it = 0;
  for (it = 1; it <= o.max_activity_iterations; ++it) {
    w.set_gamma(m, L);
    if (!solve_root(w, guess, o, x, evals)) break;
    guess = x;
    mo = w.moments(x);
    const double I = std::max(mo.I, 1e-300);
    const double phi = L + m.davies_A * davies_g(I, m.davies_b);
    const double gp = m.davies_A * davies_g_derivative(I, m.davies_b);
    G_x = gp * mo.I_x;
    G_L = 1.0 + gp * mo.I_L;
    if (std::fabs(phi) <= o.activity_tolerance) {
      ok = true;
      break;
    }
    const double slope = G_L - G_x * mo.F_L / mo.F_x;
    const double fixed_point = -m.davies_A * davies_g(I, m.davies_b);
    L = (slope > 0.25 && std::isfinite(slope)) ? L - phi / slope : fixed_point;
  }
  st.converged = ok;
  st.log10_h = x;
  st.log10_gamma1 = L;
  st.ionic_strength_mol_L = mo.I;
  st.root_evaluations = evals;
  st.activity_iterations = std::min(it, o.max_activity_iterations);
  if (jacobian != nullptr) *jacobian = {mo.F_x, mo.F_L, G_x, G_L};
  return st;
}

}  // namespace detail
}  // namespace veq::chem
