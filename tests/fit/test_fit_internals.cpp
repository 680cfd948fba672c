// SPDX-License-Identifier: MIT
// Identities of the fitter's private parts: the fast charge balance equals chem's, its Newton solve equals
// chem's bracketed solve, and the autodiff Jacobian through the root matches central differences.
#include <ceres/jet.h>

#include <algorithm>
#include <cmath>
#include <memory>

#include "fit/balance.hpp"
#include "fit/layout.hpp"
#include "fit/residual.hpp"
#include "support/approx.hpp"
#include "support/ceres_catch.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/sample.hpp"

namespace {

namespace chem = veq::chem;
namespace d = veq::fit::detail;

chem::Model<double> mixture(chem::ActivityModel activity) {
  // Two weak systems and a strong acid, a background electrolyte and titrant carbonate: every term.
  chem::Sample s;
  s.volume_mL = 25.0;
  s.background_ionic_strength_mol_L = 0.02;
  s.analytes = {chem::analyte("phosphoric acid", 0.02),
                chem::analyte("ammonium chloride", 0.01),
                chem::analyte("hydrochloric acid", 0.005)};
  chem::Titrant t;
  t.conc_mol_L = 0.1;
  t.carbonate_fraction = 0.03;
  chem::ModelOptions o;
  o.activity = activity;
  return chem::build_model(s, t, o);
}

}  // namespace

TEST_CASE("fast balance: charge, ionic strength and their slopes equal chem::charge_balance", "[fit][internals]") {
  const auto activity = GENERATE(chem::ActivityModel::ideal, chem::ActivityModel::davies);
  const chem::Model<double> m = mixture(activity);
  const d::FastBalance fb(m);
  using J2 = ceres::Jet<double, 2>;
  const chem::Model<J2> mj = chem::model_cast<J2>(m);
  for (double V : {0.0, 7.5, 21.0, 40.0}) {
    for (double x : {-2.5, -6.8, -11.0}) {
      const double L = activity == chem::ActivityModel::ideal ? 0.0 : -0.06;
      CAPTURE(V, x);
      const d::BalancePoint b = fb.eval(V, x, L);
      // chem's templated balance in dual numbers over (x, L) gives the value and both slopes at once.
      const chem::BalanceValue<J2> ref = chem::charge_balance(mj, J2(V), J2(x, 0), J2(L, 1));
      const double scale = ref.charge_scale.a;
      CHECK(b.F == veq::test::close(ref.charge.a, 1e-12, 1e-14 * scale));
      CHECK(b.F_x == veq::test::close(ref.charge.v[0], 1e-10, 1e-14 * scale));
      CHECK(b.I == veq::test::close(ref.ionic_strength.a, 1e-12));
      CHECK(b.I_x == veq::test::close(ref.ionic_strength.v[0], 1e-10, 1e-14 * scale));
      if (activity == chem::ActivityModel::davies) {
        CHECK(b.F_L == veq::test::close(ref.charge.v[1], 1e-10, 1e-14 * scale));
        CHECK(b.I_L == veq::test::close(ref.ionic_strength.v[1], 1e-10, 1e-14 * scale));
      }
    }
  }
}

TEST_CASE("fast balance: the warm Newton solve equals chem's bracketed solve", "[fit][internals]") {
  const auto activity = GENERATE(chem::ActivityModel::ideal, chem::ActivityModel::davies);
  const chem::Model<double> m = mixture(activity);
  const d::FastBalance fb(m);
  const chem::Titration<double> t(m);
  chem::Equilibrium warm;
  chem::Equilibrium newton;
  for (int i = 0; i <= 90; ++i) {
    const double V = 0.5 * i;
    const chem::Point<double> ref = t.solve(V, &warm);
    REQUIRE(ref.state.converged);
    // Newton from the previous volume's solution (what the fit does for its first evaluation).
    chem::detail::BalanceJacobian jac;
    if (i == 0) newton = ref.state;
    CAPTURE(V);
    REQUIRE(fb.newton(V, newton, jac));
    // Newton stops after a step below 1e-5 (FastBalance::newton): convergence is quadratic with a factor
    // of order ln 10, so what is left is of order 1e-10 (1e-11 with the earlier 1e-7 stop).
    CHECK(newton.log10_h == veq::test::close(ref.state.log10_h, 0.0, 1e-10));
    CHECK(newton.log10_gamma1 == veq::test::close(ref.state.log10_gamma1, 0.0, 1e-10));
  }
}

TEST_CASE(
    "the Jacobian (balance slopes times the constants' Jets, electrode columns by hand) matches central differences",
    "[fit][internals]") {
  const auto signal = GENERATE(veq::SignalKind::ph, veq::SignalKind::mv);
  // Least squares, or the robust loss in square-root form (residual sign(r) sqrt(rho(r^2))).
  const bool robust = GENERATE(false, true);
  // Davies activity (the 2x2 implicit step in x and L) or an ideal solution (x alone).
  const bool ideal = GENERATE(false, true);
  // A diprotic acid with titrant carbonate (parameters c, pKa1, pKa2, electrode, carbonate), Davies.
  d::Layout L;
  L.shape = d::shape_of(veq::fit::ModelKind::diprotic_acid);
  chem::Sample s;
  s.volume_mL = 25.0;
  chem::Analyte a;
  a.conc_mol_L = 0.05;
  a.pKa_25C = {4.0, 9.0};
  s.analytes = {a};
  chem::Titrant t;
  t.conc_mol_L = 0.1;
  t.carbonate_fraction = 0.01;
  L.base = chem::build_model(s, t);
  if (ideal) L.base.activity = chem::ActivityModel::ideal;
  L.signal = signal;
  L.nominal_titrant_mol_L = 0.1;
  auto par = [](std::string name, d::Role role, double initial, double scale, int index, int step = 0) {
    d::ParamDef p;
    p.name = std::move(name);
    p.role = role;
    p.initial = initial;
    p.scale = scale;
    p.index = index;
    p.step = step;
    return p;
  };
  L.params = {par("c", d::Role::c, 0.05, 0.05, 0),
              par("pKa1", d::Role::pKa, 4.0, 1.0, 1, 0),
              par("pKa2", d::Role::pKa, 9.0, 1.0, 2, 1),
              par("carbonate_fraction", d::Role::carbonate, 0.01, 0.01, 3)};
  if (signal == veq::SignalKind::ph) {
    L.params.push_back(par("offset", d::Role::offset, 0.02, 1.0, 4));
  } else {
    L.params.push_back(par("E0", d::Role::e0, 410.0, 60.0, 4));
    L.params.push_back(par("slope", d::Role::slope, 58.0, 60.0, 5));
  }
  L.free_count = static_cast<int>(L.params.size());
  d::Observations obs;
  for (int i = 0; i < 60; ++i) {
    obs.volume_mL.push_back(0.5 * i);
    obs.value.push_back(signal == veq::SignalKind::ph ? 3.0 + 0.15 * i : 240.0 - 8.0 * i);
  }
  std::vector<double> u;
  for (const auto& p : L.params) u.push_back(p.initial / p.scale);
  // Cold states at u, then the cost function.
  d::WarmStates warm;
  {
    const chem::Model<double> m = L.model(u.data());
    const chem::Titration<double> tt(m);
    chem::Equilibrium w;
    for (double V : obs.volume_mL) {
      const auto pt = tt.solve(V, &w);
      warm.state.push_back(pt.state);
      chem::detail::BalanceJacobian j;
      chem::Equilibrium st = pt.state;
      REQUIRE(d::FastBalance(m).newton(V, st, j));
      warm.jacobian.push_back(j);
    }
  }
  const int k = L.free_count;
  const int n = static_cast<int>(obs.volume_mL.size());
  // Weights as the robust loss sets them (here arbitrary, between 0.2 and 1).
  std::vector<double> weights;
  for (int i = 0; i < static_cast<int>(obs.volume_mL.size()); ++i) weights.push_back(0.2 + 0.8 * ((i * 7) % 10) / 9.0);
  // Huber threshold inside the spread of these residuals, so that both branches of the loss are crossed.
  const ceres::HuberLoss huber(signal == veq::SignalKind::ph ? 0.3 : 15.0);
  auto cost = std::make_unique<d::CurveCost>(&L, &obs, &warm, &weights, robust ? &huber : nullptr);
  REQUIRE(cost);
  std::vector<double> r(static_cast<std::size_t>(n)), jac(static_cast<std::size_t>(n * k));
  const double* params[] = {u.data()};
  double* jacs[] = {jac.data()};
  REQUIRE(cost->Evaluate(params, r.data(), jacs));
  if (robust) {
    // Both sides of the threshold are exercised (sqrt(rho(r^2)) > delta exactly when |r| > delta).
    const double delta = signal == veq::SignalKind::ph ? 0.3 : 15.0;
    const auto beyond = std::count_if(r.begin(), r.end(), [&](double x) { return std::fabs(x) > delta; });
    CHECK(beyond > 0);
    CHECK(beyond < n);
  }
  for (int col = 0; col < k; ++col) {
    std::vector<double> up = u, dn = u;
    const double h = 1e-6 * std::max(1.0, std::fabs(u[static_cast<std::size_t>(col)]));
    up[static_cast<std::size_t>(col)] += h;
    dn[static_cast<std::size_t>(col)] -= h;
    std::vector<double> ru(static_cast<std::size_t>(n)), rd(static_cast<std::size_t>(n));
    const double* pu[] = {up.data()};
    const double* pd[] = {dn.data()};
    REQUIRE(cost->Evaluate(pu, ru.data(), nullptr));
    REQUIRE(cost->Evaluate(pd, rd.data(), nullptr));
    for (int i = 0; i < n; ++i) {
      const double numeric = (ru[static_cast<std::size_t>(i)] - rd[static_cast<std::size_t>(i)]) / (2.0 * h);
      CAPTURE(L.params[static_cast<std::size_t>(col)].name, i);
      // Central differences: truncation O(h^2) and rounding ~1e-13/h leave about 1e-6 of agreement.
      CHECK(jac[static_cast<std::size_t>(i * k + col)] == veq::test::close(numeric, 1e-5, 1e-7));
    }
  }
}
