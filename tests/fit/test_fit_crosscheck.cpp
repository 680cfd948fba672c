// SPDX-License-Identifier: MIT
// The fit against an independent solver on the same data: Eigen's unsupported Levenberg–Marquardt
// (MINPACK's lmdif algorithm) minimising the same sum of squares of pH residuals, with the charge balance
// of tests/support/charge_balance.hpp (written apart from veq's chemistry) and central differences.
#include <catch2/catch.hpp>
#include <random>
#include <unsupported/Eigen/NonLinearOptimization>
#include <unsupported/Eigen/NumericalDiff>

#include "support/approx.hpp"
#include "support/charge_balance.hpp"
#include "veq/chem/water.hpp"
#include "veq/fit/fit.hpp"

namespace {

// pH residuals of the ideal-solution model of tests/support: parameters c, pKa1 (, pKa2).
struct IdealResiduals {
  using Scalar = double;
  enum { InputsAtCompileTime = Eigen::Dynamic, ValuesAtCompileTime = Eigen::Dynamic };
  using InputType = Eigen::VectorXd;
  using ValueType = Eigen::VectorXd;
  using JacobianType = Eigen::MatrixXd;

  veq::test::Sample base;
  std::vector<double> volume_mL;
  std::vector<double> pH;
  int steps = 1;

  [[nodiscard]] int inputs() const { return 1 + steps; }
  [[nodiscard]] int values() const { return static_cast<int>(volume_mL.size()); }
  int operator()(const Eigen::VectorXd& x, Eigen::VectorXd& f) const {
    veq::test::Sample s = base;
    s.weak = {{x[0], {}}};
    for (int j = 0; j < steps; ++j) s.weak[0].pKa.push_back(x[1 + j]);
    for (std::size_t i = 0; i < volume_mL.size(); ++i)
      f[static_cast<Eigen::Index>(i)] = pH[i] - veq::test::pH_at_volume(s, volume_mL[i]);
    return 0;
  }
};

struct Problem {
  veq::test::Sample truth;
  std::vector<double> volume_mL, pH;
  std::vector<double> equivalence_mL;
};

// 150 readings to 1.3 x the last equivalence volume with 0.01 pH Gaussian noise (fixed seed).
Problem make(const std::vector<double>& pKa, double conc, std::uint64_t seed) {
  Problem p;
  p.truth.V0_mL = 25.0;
  p.truth.titrant = 0.1;
  // veq's pKw at 25 °C (IAPWS R11-07): the same constant on both sides, so that the models agree.
  p.truth.pKw = veq::chem::pKw(25.0);
  p.truth.weak = {{conc, pKa}};
  const double v_last = p.truth.V0_mL * conc * static_cast<double>(pKa.size()) / p.truth.titrant;
  for (std::size_t k = 1; k <= pKa.size(); ++k)
    p.equivalence_mL.push_back(v_last * static_cast<double>(k) / pKa.size());
  std::mt19937_64 rng(seed);
  std::normal_distribution<double> noise(0.0, 0.01);
  for (int i = 0; i < 150; ++i) {
    const double v = 1.3 * v_last * i / 149.0;
    p.volume_mL.push_back(v);
    p.pH.push_back(veq::test::pH_at_volume(p.truth, v) + noise(rng));
  }
  return p;
}

}  // namespace

TEST_CASE("the fit and an independent Levenberg-Marquardt reach the same optimum to 1e-6", "[fit][crosscheck]") {
  struct Case {
    std::string model;
    std::vector<double> pKa;
    double conc;
  };
  // Acetic acid pKa 4.756 (CRC Handbook, REFERENCES §2); carbonic acid 6.35 / 10.33 (CRC Handbook).
  const auto c = GENERATE(Case{"weak_acid", {4.756}, 0.1}, Case{"diprotic_acid", {6.35, 10.33}, 0.05});
  CAPTURE(c.model);
  const Problem p = make(c.pKa, c.conc, 20240611);

  // veq: least squares (no robust loss), ideal solution, electrode held: the objective of the other solver.
  veq::Curve curve;
  curve.volume_mL = p.volume_mL;
  curve.value = p.pH;
  curve.line.assign(p.pH.size(), 1);
  curve.spike.assign(p.pH.size(), 0);
  curve.noise_sd = 0.01;
  curve.direction = +1;
  curve.temperature_C = 25.0;
  std::vector<veq::signal::Endpoint> endpoints;
  for (std::size_t k = 0; k < p.equivalence_mL.size(); ++k) {
    veq::signal::Endpoint e;
    e.index = static_cast<int>(k + 1);
    e.volume_mL = p.equivalence_mL[k] * 1.01;  // a start near, not at, the answer
    e.uncertainty_mL = 0.05;
    e.snr = 50.0;
    endpoints.push_back(e);
  }
  veq::fit::FitInputs in;
  in.sample_volume_mL = 25.0;
  in.titrant_conc_mol_L = 0.1;
  in.titrant = veq::TitrantKind::base;
  veq::fit::FitOptions o;
  o.model = c.model;
  o.loss = veq::fit::LossKind::none;
  o.activity = veq::chem::ActivityModel::ideal;
  o.fit_electrode = false;
  const veq::fit::FitResult r = veq::fit::fit_titration(curve, in, endpoints, {}, o);
  REQUIRE(r.best);
  CAPTURE(r.best->termination);
  REQUIRE(r.best->status == veq::fit::FitStatus::converged);

  // Eigen: from a start 5 % off in c and 0.2 off in each pKa.
  IdealResiduals f;
  f.base = p.truth;
  f.volume_mL = p.volume_mL;
  f.pH = p.pH;
  f.steps = static_cast<int>(c.pKa.size());
  Eigen::VectorXd x(f.inputs());
  x[0] = 1.05 * c.conc;
  for (int j = 0; j < f.steps; ++j) x[1 + j] = c.pKa[static_cast<std::size_t>(j)] + 0.2;
  Eigen::NumericalDiff<IdealResiduals, Eigen::Central> nd(f);
  Eigen::LevenbergMarquardt<Eigen::NumericalDiff<IdealResiduals, Eigen::Central>> lm(nd);
  lm.parameters.xtol = 1e-14;
  lm.parameters.ftol = 1e-14;
  lm.parameters.maxfev = 20000;
  const auto status = lm.minimize(x);
  CAPTURE(static_cast<int>(status));
  REQUIRE(status > 0);
  REQUIRE(status <= 4);  // converged (relative reduction, step size or both)

  CHECK(r.best->parameter("c")->value == veq::test::close(x[0], 1e-6));
  for (int j = 0; j < f.steps; ++j) {
    CAPTURE(j);
    CHECK(r.best->parameter("pKa" + std::to_string(j + 1))->value == veq::test::close(x[1 + j], 1e-6));
  }
  // Same optimum, same residual sum of squares.
  Eigen::VectorXd res(f.values());
  f(x, res);
  const double rss_eigen = res.squaredNorm();
  double rss_veq = 0.0;
  for (double e : r.best->residuals) rss_veq += e * e;
  CHECK(rss_veq == veq::test::close(rss_eigen, 1e-6));
}
