// SPDX-License-Identifier: MIT
// Residual-pattern tests, information criteria and Student t quantiles used by the fit.
#include <boost/math/distributions/normal.hpp>
#include <boost/math/distributions/students_t.hpp>
#include <cmath>

#include "veq/fit/fit.hpp"

namespace veq::fit {

ResidualTests residual_tests(const std::vector<double>& residuals) {
  ResidualTests t;
  // Durbin & Watson, Biometrika 37 (1950) 409: d = sum (e_i - e_(i-1))^2 / sum e_i^2; 2 for independent errors.
  double num = 0.0, den = 0.0;
  for (std::size_t i = 0; i < residuals.size(); ++i) {
    den += residuals[i] * residuals[i];
    if (i > 0) num += (residuals[i] - residuals[i - 1]) * (residuals[i] - residuals[i - 1]);
  }
  t.durbin_watson = den > 0.0 ? num / den : 2.0;
  // Wald & Wolfowitz, Ann. Math. Stat. 11 (1940) 147: runs of equal signs; under independence
  // E[R] = 2 n+ n- / n + 1, Var[R] = 2 n+ n- (2 n+ n- - n) / (n^2 (n - 1)); normal approximation.
  int plus = 0, minus = 0, runs = 0, last = 0;
  for (double r : residuals) {
    if (r == 0.0) continue;
    const int s = r > 0.0 ? 1 : -1;
    (s > 0 ? plus : minus) += 1;
    if (s != last) ++runs;
    last = s;
  }
  const double n = plus + minus;
  t.runs = runs;
  if (n < 10 || plus == 0 || minus == 0) {
    t.expected_runs = n > 0 ? 2.0 * plus * minus / n + 1.0 : 0.0;
    return t;
  }
  const double np = plus, nm = minus;
  t.expected_runs = 2.0 * np * nm / n + 1.0;
  const double var = 2.0 * np * nm * (2.0 * np * nm - n) / (n * n * (n - 1.0));
  if (!(var > 0.0)) return t;
  t.runs_z = (runs - t.expected_runs) / std::sqrt(var);
  t.runs_p = boost::math::cdf(boost::math::normal_distribution<double>(0.0, 1.0), t.runs_z);
  t.runs_tested = true;
  return t;
}

double aicc(double rss, int n, int k) {
  const double nn = n, kk = k;
  return nn * std::log(rss / nn) + 2.0 * kk + 2.0 * kk * (kk + 1.0) / (nn - kk - 1.0);
}

double bic(double rss, int n, int k) {
  const double nn = n;
  return nn * std::log(rss / nn) + static_cast<double>(k) * std::log(nn);
}

double t_quantile_975(int dof) {
  const boost::math::students_t_distribution<double> t(static_cast<double>(dof < 1 ? 1 : dof));
  return boost::math::quantile(boost::math::complement(t, 0.025));
}

}  // namespace veq::fit
