// SPDX-License-Identifier: MIT
// Ceres settings and solve for the fitter, and the parameter covariance from the Jacobian.
#include "fit/solver.hpp"

#include <glog/logging.h>

#include <Eigen/SVD>
#include <mutex>
#include <utility>
#include <vector>

namespace veq::fit::detail {
namespace {

// Ceres reports through glog (as ERRORs on stderr). The fitter reports what matters in its own flags, so
// glog is silenced below FATAL once, before the first solve.
void quiet_glog() {
  static std::once_flag once;
  std::call_once(once, [] { FLAGS_minloglevel = google::GLOG_FATAL; });
}

}  // namespace

ceres::Solver::Options solver_options(const FitOptions& options) {
  ceres::Solver::Options o;
  o.minimizer_type = ceres::TRUST_REGION;
  o.trust_region_strategy_type = ceres::LEVENBERG_MARQUARDT;
  o.linear_solver_type = ceres::DENSE_NORMAL_CHOLESKY;
  o.num_threads = 1;
  o.max_num_iterations = options.max_iterations;
  o.function_tolerance = options.function_tolerance;
  o.parameter_tolerance = options.parameter_tolerance;
  o.gradient_tolerance = options.gradient_tolerance;
  // A trust-region step that leaves the bounds is projected back onto them;
  // Ceres' default line search along the projected step would evaluate the
  // Jacobian at every trial (measured: twice the Jacobians per iteration).
  o.max_num_line_search_step_size_iterations = 0;
  o.logging_type = ceres::SILENT;
  o.minimizer_progress_to_stdout = false;
  return o;
}

SolveReport solve(ceres::Problem& problem, const FitOptions& options, ceres::IterationCallback* callback) {
  quiet_glog();
  SolveReport r;
  try {
    ceres::Solver::Summary summary;
    ceres::Solver::Options so = solver_options(options);
    if (callback != nullptr) so.callbacks.push_back(callback);
    ceres::Solve(so, &problem, &summary);
    r.termination = std::string(ceres::TerminationTypeToString(summary.termination_type)) + ": " + summary.message;
    r.iterations = summary.num_successful_steps + summary.num_unsuccessful_steps;
    r.cost = summary.final_cost;
    if (summary.termination_type == ceres::CONVERGENCE || summary.termination_type == ceres::USER_SUCCESS) {
      r.status = FitStatus::converged;
    } else if (summary.termination_type == ceres::NO_CONVERGENCE && summary.IsSolutionUsable()) {
      r.status = FitStatus::stopped;
    } else {
      r.status = FitStatus::failed;
    }
  } catch (const std::exception& e) {
    r.status = FitStatus::failed;
    r.termination = std::string("FAILURE: ") + e.what();
  }
  return r;
}

std::optional<Eigen::MatrixXd> unscaled_covariance(const Eigen::MatrixXd& jacobian) {
  const Eigen::Index k = jacobian.cols();
  if (k < 1 || jacobian.rows() < k || !jacobian.allFinite()) return std::nullopt;
  try {
    const Eigen::BDCSVD<Eigen::MatrixXd> svd(jacobian, Eigen::ComputeThinU | Eigen::ComputeThinV);
    const Eigen::VectorXd& sv = svd.singularValues();  // in decreasing order
    const double largest = sv[0];
    if (!(largest > 0.0)) return std::nullopt;
    // min_reciprocal_condition_number 1e-14 on the singular values squared: a ratio of 1e-7.
    constexpr double kMinRatio = 1e-7;
    Eigen::VectorXd inverse_squared(k);
    for (Eigen::Index i = 0; i < k; ++i) {
      if (sv[i] / largest < kMinRatio) return std::nullopt;
      inverse_squared[i] = 1.0 / (sv[i] * sv[i]);
    }
    Eigen::MatrixXd c = svd.matrixV() * inverse_squared.asDiagonal() * svd.matrixV().transpose();
    if (!c.allFinite()) return std::nullopt;
    return c;
  } catch (const std::exception&) {
    return std::nullopt;
  }
}

}  // namespace veq::fit::detail
