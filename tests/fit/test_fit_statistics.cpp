// SPDX-License-Identifier: MIT
// The fit's statistics: runs test, Durbin–Watson, information criteria, Student t quantiles.
#include <catch2/catch.hpp>
#include <cmath>

#include "support/approx.hpp"
#include "veq/fit/fit.hpp"

TEST_CASE("runs test: the Wald-Wolfowitz mean and variance", "[fit][statistics]") {
  // Signs + + - - + - + + + -: n+ = 6, n- = 4, 6 runs. Mean 2 n1 n2/n + 1 = 5.8, variance
  // 2 n1 n2 (2 n1 n2 - n)/(n^2 (n - 1)) = 48 x 38 / 900 (NIST/SEMATECH e-Handbook of Statistical Methods,
  // 1.3.5.13 "Runs test for detecting non-randomness", from memory; Wald & Wolfowitz 1940).
  const veq::fit::ResidualTests t = veq::fit::residual_tests({1, 2, -1, -3, 2, -1, 1, 1, 4, -2});
  CHECK(t.runs == 6);
  CHECK(t.expected_runs == veq::test::close(5.8, 1e-12));
  CHECK(t.runs_tested);
  CHECK(t.runs_z == veq::test::close(0.2 / std::sqrt(48.0 * 38.0 / 900.0), 1e-12));
  // Phi(0.1405) = 0.5559 (standard normal table, from memory; 4 decimals).
  CHECK(t.runs_p == veq::test::close(0.5559, 0.0, 1e-4));
  // Zeros are skipped; fewer than 10 signs are not tested.
  const veq::fit::ResidualTests few = veq::fit::residual_tests({1, 0, -1, 1, -1});
  CHECK(few.runs == 4);
  CHECK_FALSE(few.runs_tested);
}

TEST_CASE("runs test: a curved residual pattern has too few runs", "[fit][statistics]") {
  // A parabola's residuals from a straight line: + ... - ... +: three runs out of 60 readings.
  std::vector<double> r;
  for (int i = 0; i < 60; ++i) r.push_back((i - 29.5) * (i - 29.5) - 300.0);
  const veq::fit::ResidualTests t = veq::fit::residual_tests(r);
  CHECK(t.runs == 3);
  CHECK(t.runs_p < 1e-6);
  // Alternating signs: as many runs as readings, the other tail.
  std::vector<double> alt;
  for (int i = 0; i < 60; ++i) alt.push_back(i % 2 ? 1.0 : -1.0);
  CHECK(veq::fit::residual_tests(alt).runs_p > 0.999);
}

TEST_CASE("Durbin-Watson: 2 sum of squared differences over the sum of squares", "[fit][statistics]") {
  // d = sum (e_i - e_(i-1))^2 / sum e_i^2 (Durbin & Watson, Biometrika 37 (1950) 409): 0 for a constant
  // run, 4 (n-1)/n for alternating signs, about 2 for independent errors.
  CHECK(veq::fit::residual_tests({1, 1, 1, 1}).durbin_watson == veq::test::close(0.0, 0.0, 1e-15));
  CHECK(veq::fit::residual_tests({1, -1, 1, -1}).durbin_watson == veq::test::close(3.0, 1e-15));
}

TEST_CASE("AICc and BIC by their formulas", "[fit][statistics]") {
  // Hurvich & Tsai (1989): AICc = n ln(RSS/n) + 2k + 2k(k+1)/(n-k-1); n = 20, RSS = 2, k = 3:
  // 20 ln 0.1 + 6 + 24/16 = -38.5517. Schwarz (1978): BIC = n ln(RSS/n) + k ln n = -46.0517 + 8.9872.
  CHECK(veq::fit::aicc(2.0, 20, 3) == veq::test::close(20.0 * std::log(0.1) + 6.0 + 1.5, 1e-12));
  CHECK(veq::fit::aicc(2.0, 20, 3) == veq::test::close(-38.5517, 0.0, 1e-4));
  CHECK(veq::fit::bic(2.0, 20, 3) == veq::test::close(-37.0645, 0.0, 1e-4));
  // The correction vanishes as n grows: AICc -> AIC.
  CHECK(veq::fit::aicc(1e4, 100000, 3) - (100000 * std::log(0.1) + 6.0) < 1e-3);
}

TEST_CASE("Student t quantiles t(0.975, dof)", "[fit][statistics]") {
  // Table of the t distribution (NIST/SEMATECH e-Handbook 1.3.6.7.2, from memory; to 3 decimals):
  // 12.706 (1), 2.228 (10), 2.042 (30), 1.984 (100); the normal 1.960 in the limit.
  CHECK(veq::fit::t_quantile_975(1) == veq::test::close(12.706, 0.0, 5e-4));
  CHECK(veq::fit::t_quantile_975(10) == veq::test::close(2.228, 0.0, 5e-4));
  CHECK(veq::fit::t_quantile_975(30) == veq::test::close(2.042, 0.0, 5e-4));
  CHECK(veq::fit::t_quantile_975(100) == veq::test::close(1.984, 0.0, 5e-4));
  CHECK(veq::fit::t_quantile_975(1000000) == veq::test::close(1.960, 0.0, 5e-4));
}
