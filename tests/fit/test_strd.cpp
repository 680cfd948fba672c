// SPDX-License-Identifier: MIT
// Acceptance test of the fitter (its Ceres settings, solve and covariance) on NIST StRD nonlinear regression
// problems of lower, average and higher difficulty, graded by the log relative error (LRE, correct digits).
//
// NIST Statistical Reference Datasets, nonlinear regression:
// https://www.itl.nist.gov/div898/strd/nls/nls_main.shtml (data and certified values per problem at
// https://www.itl.nist.gov/div898/strd/nls/data/<name>.shtml). The data and certified values below were
// copied from copies of the StRD files (Misra1a's certified values were also known from memory and agree).
// Separate from the chemistry tests, which check against handbook values.
#include <ceres/autodiff_cost_function.h>
#include <ceres/crs_matrix.h>

#include <array>
#include <cmath>
#include <limits>
#include <vector>

#include "fit/solver.hpp"
#include "support/ceres_catch.hpp"

namespace {

struct Problem {
  std::string name;
  std::vector<double> x, y;
  std::vector<std::vector<double>> starts;
  std::vector<double> certified;     // parameters
  std::vector<double> certified_sd;  // their standard deviations
  double certified_rss = 0.0;
};

// LRE = -log10(|value - certified| / |certified|), capped at 11 (the certified values carry 11 digits).
double lre(double value, double certified) {
  const double rel = std::fabs(value - certified) / std::fabs(certified);
  return rel == 0.0 ? 11.0 : std::min(11.0, -std::log10(rel));
}

// Misra1a (lower difficulty): y = b1 (1 - exp(-b2 x)); Misra1d (average): y = b1 b2 x / (1 + b2 x).
// Same 14 observations (Misra, NIST 1978, dental research monomolecular adsorption).
const std::vector<double> kMisraX = {
    77.6, 114.9, 141.1, 190.8, 239.9, 289.0, 332.8, 378.4, 434.8, 477.3, 536.8, 593.1, 689.1, 760.0};
const std::vector<double> kMisraY = {
    10.07, 14.73, 17.94, 23.93, 29.61, 35.18, 40.02, 44.82, 50.76, 55.05, 61.01, 66.40, 75.47, 81.78};

struct Misra1a {
  double x, y;
  template <typename T>
  bool operator()(const T* b, T* r) const {
    r[0] = y - b[0] * (1.0 - exp(-b[1] * x));
    return true;
  }
};
struct Misra1d {
  double x, y;
  template <typename T>
  bool operator()(const T* b, T* r) const {
    r[0] = y - b[0] * b[1] * x / (1.0 + b[1] * x);
    return true;
  }
};
// MGH09 (higher; Kowalik & Osborne 1978): y = b1 (x^2 + x b2) / (x^2 + x b3 + b4).
struct Mgh09 {
  double x, y;
  template <typename T>
  bool operator()(const T* b, T* r) const {
    r[0] = y - b[0] * (x * x + x * b[1]) / (x * x + x * b[2] + b[3]);
    return true;
  }
};
// MGH10 (higher; Meyer 1970): y = b1 exp(b2 / (x + b3)).
struct Mgh10 {
  double x, y;
  template <typename T>
  bool operator()(const T* b, T* r) const {
    r[0] = y - b[0] * exp(b[1] / (x + b[2]));
    return true;
  }
};

// The model in the fitter's scaled parameters u = b / scale, scale the start's magnitude (as the titration
// fit scales its parameters), so that the covariance is computed on a well-conditioned Jacobian.
template <typename Functor, int K>
struct Scaled {
  Functor f;
  std::array<double, K> scale;
  template <typename T>
  bool operator()(const T* u, T* r) const {
    std::array<T, K> b;
    for (int j = 0; j < K; ++j) b[static_cast<std::size_t>(j)] = u[j] * scale[static_cast<std::size_t>(j)];
    return f(b.data(), r);
  }
};

template <typename Functor, int K>
void grade(const Problem& p, int start, double min_digits_parameters, double min_digits_sd, int max_iterations = 100) {
  const std::vector<double>& b0 = p.starts[static_cast<std::size_t>(start)];
  std::array<double, K> scale;
  std::vector<double> u(K, 1.0);
  for (int j = 0; j < K; ++j) scale[static_cast<std::size_t>(j)] = std::fabs(b0[static_cast<std::size_t>(j)]);
  ceres::Problem problem;
  for (std::size_t i = 0; i < p.x.size(); ++i) {
    problem.AddResidualBlock(
        new ceres::AutoDiffCostFunction<Scaled<Functor, K>, 1, K>(new Scaled<Functor, K>{{p.x[i], p.y[i]}, scale}),
        nullptr,
        u.data());
  }
  // The fitter's settings, as for a titration (FitOptions defaults; the iteration limit raised where said).
  veq::fit::FitOptions options;
  options.max_iterations = max_iterations;
  const veq::fit::detail::SolveReport report = veq::fit::detail::solve(problem, options);
  CAPTURE(p.name, start + 1, report.termination, report.iterations);
  REQUIRE(report.status == veq::fit::FitStatus::converged);
  const double rss = 2.0 * report.cost;
  CHECK(lre(rss, p.certified_rss) >= min_digits_parameters);
  // The Jacobian at the solution, from the problem (one row per observation), for the fitter's covariance.
  ceres::CRSMatrix crs;
  REQUIRE(problem.Evaluate(ceres::Problem::EvaluateOptions(), nullptr, nullptr, nullptr, &crs));
  Eigen::MatrixXd jacobian = Eigen::MatrixXd::Zero(crs.num_rows, crs.num_cols);
  for (int row = 0; row < crs.num_rows; ++row) {
    for (int at = crs.rows[static_cast<std::size_t>(row)]; at < crs.rows[static_cast<std::size_t>(row) + 1]; ++at)
      jacobian(row, crs.cols[static_cast<std::size_t>(at)]) = crs.values[static_cast<std::size_t>(at)];
  }
  const auto cov = veq::fit::detail::unscaled_covariance(jacobian);
  REQUIRE(cov);
  const double s2 = rss / static_cast<double>(p.x.size() - K);  // residual variance, as the fit scales it
  for (int j = 0; j < K; ++j) {
    const auto jj = static_cast<std::size_t>(j);
    CAPTURE(
        j, lre(u[jj] * scale[jj], p.certified[jj]), lre(std::sqrt(s2 * (*cov)(j, j)) * scale[jj], p.certified_sd[jj]));
    CHECK(lre(u[jj] * scale[jj], p.certified[jj]) >= min_digits_parameters);
    CHECK(lre(std::sqrt(s2 * (*cov)(j, j)) * scale[jj], p.certified_sd[jj]) >= min_digits_sd);
  }
}

}  // namespace

TEST_CASE("StRD Misra1a (lower difficulty): 7 digits of the parameters and of their standard deviations",
          "[fit][strd]") {
  Problem p;
  p.name = "Misra1a";
  p.x = kMisraX;
  p.y = kMisraY;
  p.starts = {{500.0, 1e-4}, {250.0, 5e-4}};
  p.certified = {2.3894212918e+02, 5.5015643181e-04};
  p.certified_sd = {2.7070075241e+00, 7.2668688436e-06};
  p.certified_rss = 1.2455138894e-01;
  const int start = GENERATE(0, 1);
  grade<Misra1a, 2>(p, start, 7.0, 7.0);
}

TEST_CASE("StRD Misra1d (average difficulty): 7 digits of the parameters and of their standard deviations",
          "[fit][strd]") {
  Problem p;
  p.name = "Misra1d";
  p.x = kMisraX;
  p.y = kMisraY;
  p.starts = {{500.0, 1e-4}, {450.0, 3e-4}};
  p.certified = {4.3736970754e+02, 3.0227324449e-04};
  p.certified_sd = {3.6489174345e+00, 2.9334354479e-06};
  p.certified_rss = 5.6419295283e-02;
  const int start = GENERATE(0, 1);
  grade<Misra1d, 2>(p, start, 7.0, 7.0);
}

TEST_CASE("StRD MGH09 (higher difficulty), start 2: 5 digits of the parameters and of their standard deviations",
          "[fit][strd]") {
  Problem p;
  p.name = "MGH09";
  p.x = {4.0, 2.0, 1.0, 0.5, 0.25, 0.167, 0.125, 0.1, 0.0833, 0.0714, 0.0625};
  p.y = {0.1957, 0.1947, 0.1735, 0.16, 0.0844, 0.0627, 0.0456, 0.0342, 0.0323, 0.0235, 0.0246};
  // Start 1 (25, 39, 41.5, 39) runs to the local minimum at infinity the StRD page warns of; start 2 is graded.
  p.starts = {{25.0, 39.0, 41.5, 39.0}, {0.25, 0.39, 0.415, 0.39}};
  p.certified = {1.9280693458e-01, 1.9128232873e-01, 1.2305650693e-01, 1.3606233068e-01};
  p.certified_sd = {1.1435312227e-02, 1.9633220911e-01, 8.0842031232e-02, 9.0025542308e-02};
  p.certified_rss = 3.0750560385e-04;
  grade<Mgh09, 4>(p, 1, 5.0, 5.0);
}

TEST_CASE(
    "StRD MGH10 (higher difficulty), start 2, 1000 iterations: 5 digits of the parameters and of their standard "
    "deviations",
    "[fit][strd]") {
  Problem p;
  p.name = "MGH10";
  p.x = {50, 55, 60, 65, 70, 75, 80, 85, 90, 95, 100, 105, 110, 115, 120, 125};
  p.y = {34780, 28610, 23650, 19630, 16370, 13720, 11540, 9744, 8261, 7030, 6005, 5147, 4427, 3820, 3307, 2872};
  p.starts = {{2.0, 400000.0, 25000.0}, {0.02, 4000.0, 250.0}};
  p.certified = {5.6096364710e-03, 6.1813463463e+03, 3.4522363462e+02};
  p.certified_sd = {1.5687892471e-04, 2.3309021107e+01, 7.8486103508e-01};
  p.certified_rss = 8.7945855171e+01;
  grade<Mgh10, 3>(p, 1, 7.0, 7.0, 1000);
}

TEST_CASE("Covariance from the Jacobian: straight line's (X^T X)^-1 in closed form; rank deficiency refused",
          "[fit][covariance]") {
  // For y = a + b x the Jacobian's columns are 1 and x, and (X^T X)^-1 has var(b) = 1 / Sxx,
  // var(a) = sum x^2 / (n Sxx), cov(a, b) = -mean(x) / Sxx, Sxx = sum (x - mean)^2
  // (ordinary least squares, e.g. Draper & Smith, Applied Regression Analysis, ch. 1; from memory).
  const std::vector<double> x = {0.5, 1.0, 2.0, 3.5, 4.0, 7.0};
  const auto n = static_cast<double>(x.size());
  double sum = 0.0, sum2 = 0.0;
  for (double v : x) sum += v, sum2 += v * v;
  const double mean = sum / n;
  const double sxx = sum2 - n * mean * mean;
  Eigen::MatrixXd jacobian(static_cast<Eigen::Index>(x.size()), 2);
  for (std::size_t i = 0; i < x.size(); ++i) {
    jacobian(static_cast<Eigen::Index>(i), 0) = 1.0;
    jacobian(static_cast<Eigen::Index>(i), 1) = x[i];
  }
  const auto cov = veq::fit::detail::unscaled_covariance(jacobian);
  REQUIRE(cov);
  CHECK((*cov)(1, 1) == Approx(1.0 / sxx).epsilon(1e-12));
  CHECK((*cov)(0, 0) == Approx(sum2 / (n * sxx)).epsilon(1e-12));
  CHECK((*cov)(0, 1) == Approx(-mean / sxx).epsilon(1e-12));
  CHECK((*cov)(1, 0) == Approx(-mean / sxx).epsilon(1e-12));
  // A column that repeats another (two parameters the readings cannot tell apart): no covariance.
  Eigen::MatrixXd twin(static_cast<Eigen::Index>(x.size()), 2);
  twin.col(0) = jacobian.col(1);
  twin.col(1) = 2.0 * jacobian.col(1);
  CHECK_FALSE(veq::fit::detail::unscaled_covariance(twin));
  // Fewer rows than parameters, or a non-finite entry: none either.
  CHECK_FALSE(veq::fit::detail::unscaled_covariance(jacobian.topRows(1)));
  jacobian(2, 1) = std::numeric_limits<double>::quiet_NaN();
  CHECK_FALSE(veq::fit::detail::unscaled_covariance(jacobian));
}
