// SPDX-License-Identifier: MIT
// The chemistry templates take Ceres Jets; derivatives through the root match central differences.
#include <ceres/jet.h>

#include <catch2/catch.hpp>
#include <cmath>
#include <functional>

#include "support/approx.hpp"
#include "veq/chem/analytes.hpp"
#include "veq/chem/equilibrium.hpp"
#include "veq/chem/sample.hpp"

using veq::test::close;
namespace chem = veq::chem;

namespace {

constexpr int kParams = 11;
using Jet = ceres::Jet<double, kParams>;

// Parameter k of a model, by reference, in any scalar type.
template <typename T>
T& parameter(chem::Model<T>& m, T& volume, int k) {
  switch (k) {
    case 0:
      return m.protolytes[0].conc_mol_L;
    case 1:
      return m.protolytes[0].pKa[0];
    case 2:
      return m.protolytes[0].pKa[1];
    case 3:
      return m.protolytes[1].pKa[0];
    case 4:
      return m.titrant_conc_mol_L;
    case 5:
      return m.sample_volume_mL;
    case 6:
      return m.pKw;
    case 7:
      return m.strong_acid_mol_L;
    case 8:
      return m.davies_A;
    case 9:
      return m.titrant_carbonate.conc_mol_L;
    default:
      return volume;
  }
}

const char* kNames[kParams] = {
    "conc", "pKa1", "pKa2", "pKa(NH4+)", "Ct", "V0", "pKw", "strong acid", "A", "carbonate", "V"};

chem::Model<double> base_model(chem::ActivityModel activity) {
  chem::Sample s;
  s.volume_mL = 25.0;
  s.analytes = {chem::analyte("phosphoric acid", 0.03), chem::analyte("ammonium chloride", 0.01)};
  chem::Analyte hcl;
  hcl.kind = chem::AnalyteKind::strong_acid;
  hcl.conc_mol_L = 0.004;
  s.analytes.push_back(hcl);
  s.background_ionic_strength_mol_L = 0.02;
  chem::Titrant t;
  t.carbonate_fraction = 0.02;
  chem::ModelOptions o;
  o.activity = activity;
  return chem::build_model(s, t, o);
}

}  // namespace

TEST_CASE("Jet derivatives of pH agree with central differences to 1e-6", "[chem][jet]") {
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    const chem::Model<double> m0 = base_model(activity);
    chem::Model<Jet> mj = chem::model_cast<Jet>(m0);
    // Volumes across the run: start, buffer, near the first and second jumps, the alkaline end.
    for (double v0 : {0.0, 4.0, 7.0, 8.6, 11.0, 15.5, 19.0, 30.0}) {
      Jet vj(v0);
      for (int k = 0; k < kParams; ++k) {
        parameter(mj, vj, k).v.setZero();
        parameter(mj, vj, k).v[k] = 1.0;
      }
      const chem::Titration<Jet> tj(mj);
      const Jet pH = tj.pH(vj);
      const double pH0 = chem::Titration<double>(m0).pH(v0);
      CHECK(pH.a == close(pH0, 0.0, 1e-13));
      for (int k = 0; k < kParams; ++k) {
        // Central differences at steps h and h/2, combined by Richardson extrapolation (truncation error
        // O(h^4)); h = 1e-4 of the parameter's scale: 0.1 mol/L for concentrations, 25 mL for V0, 1 else.
        auto at = [&](double delta) {
          chem::Model<double> m = m0;
          double v = v0;
          parameter(m, v, k) += delta;
          return chem::Titration<double>(m).pH(v);
        };
        const bool conc = k == 0 || k == 4 || k == 7 || k == 9;
        const double h = 1e-4 * (conc ? 0.1 : k == 5 ? 25.0 : 1.0);
        if (k == 10 && v0 < h) continue;  // no negative volumes
        const double d1 = (at(h) - at(-h)) / (2.0 * h);
        const double d2 = (at(h / 2) - at(-h / 2)) / h;
        const double fd = (4.0 * d2 - d1) / 3.0;
        INFO("activity " << chem::to_string(activity) << ", V = " << v0 << ", d pH / d " << kNames[k]);
        if (activity == chem::ActivityModel::ideal && k == 8) {
          CHECK(pH.v[k] == 0.0);  // A does not enter an ideal solution
          continue;
        }
        CHECK(pH.v[k] == close(fd, 1e-6, 1e-9));
      }
    }
  }
}

TEST_CASE("Jets pass through the water, activity, speciation and V(pH) templates", "[chem][jet]") {
  using J1 = ceres::Jet<double, 1>;
  // d pKw / d t from the IAPWS formula vs central difference.
  const J1 t(25.0, 0);
  const J1 pkw = chem::pKw(t);
  const double h = 1e-4;
  CHECK(pkw.v[0] == close((chem::pKw(25.0 + h) - chem::pKw(25.0 - h)) / (2 * h), 1e-6));
  const J1 a = chem::debye_huckel_A(J1(30.0, 0));
  CHECK(a.v[0] == close((chem::debye_huckel_A(31.0) - chem::debye_huckel_A(29.0)) / 2.0, 1e-9));
  const J1 lg = chem::davies_log10_gamma(2, J1(0.05, 0), J1(0.51));
  CHECK(lg.v[0] ==
        close((chem::davies_log10_gamma(2, 0.05 + 1e-7, 0.51) - chem::davies_log10_gamma(2, 0.05 - 1e-7, 0.51)) / 2e-7,
              1e-6));

  // V(pH) with Jets: derivative w.r.t. pH is 1 / (d pH / d V) from the forward solve.
  for (auto activity : {chem::ActivityModel::ideal, chem::ActivityModel::davies}) {
    const chem::Model<double> m0 = base_model(activity);
    const chem::Titration<J1> tj(chem::model_cast<J1>(m0));
    const chem::Titration<double> td(m0);
    for (double v : {3.0, 12.0, 25.0}) {
      const double ph = td.pH(v);
      const J1 vol = tj.volume_at_pH(J1(ph, 0));
      const J1 fwd = tj.pH(J1(v, 0));
      INFO("activity " << chem::to_string(activity) << ", V = " << v);
      CHECK(vol.a == close(v, 0.0, 1e-10));
      CHECK(vol.v[0] * fwd.v[0] == close(1.0, 1e-9));
    }
  }
  chem::Protolyte<J1> p = chem::protolyte_cast<J1>(base_model(chem::ActivityModel::ideal).protolytes[0]);
  std::array<J1, chem::kMaxSteps + 1> f;
  chem::form_fractions(p, J1(-7.2, 0), J1(0.0), f.data());
  // d alpha_1 / d x at the crossing of H2PO4- and HPO4 2-: alpha_1 = alpha_2 = 1/2 there, and the
  // derivative is ln10 * alpha_1 * (n_bar - 1) (identity of the mass-action law).
  double nbar = 0.0;
  for (int j = 0; j <= 3; ++j) nbar += j * f[static_cast<std::size_t>(j)].a;
  CHECK(f[1].v[0] == close(std::log(10.0) * f[1].a * (nbar - 1.0), 1e-9));
}
