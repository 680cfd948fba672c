// SPDX-License-Identifier: MIT
// The fitter's use of Ceres in one place: solver settings, the solve, and the parameter covariance.
//
// The NIST StRD acceptance test (tests/fit/test_strd.cpp) runs these same
// functions on certified problems, so that what it grades is what fits titrations.
#pragma once

#include <ceres/iteration_callback.h>
#include <ceres/problem.h>
#include <ceres/solver.h>

#include <Eigen/Core>
#include <optional>
#include <string>

#include "veq/fit/fit.hpp"

namespace veq::fit::detail {

// Levenberg–Marquardt, dense normal equations (Cholesky), one thread, silent; limits from options.
[[nodiscard]] ceres::Solver::Options solver_options(const FitOptions& options);

struct SolveReport {
  FitStatus status = FitStatus::failed;
  std::string termination;  // "CONVERGENCE: ..." (Ceres' type and message)
  int iterations = 0;
  double cost = 0.0;  // 1/2 sum of squared (robust) residuals
};

// Solves the problem in place; callback (may be null) is called after every
// iteration. Never throws.
[[nodiscard]] SolveReport solve(ceres::Problem& problem,
                                const FitOptions& options,
                                ceres::IterationCallback* callback = nullptr);

// (J^T J)^-1 from the Jacobian J of the residuals (rows: residuals, columns: the k parameters), by the
// singular value decomposition J = U S V^T: V S^-2 V^T, as ceres::Covariance computes it with its DENSE_SVD
// algorithm (Eigen's BDCSVD), built here from the Jacobian the fit already evaluates instead of through a
// ceres::Problem. Fails (nullopt) when J is rank deficient to 1e-14 in reciprocal condition (a singular
// value below 1e-7 of the largest) or not finite. Not yet scaled by the residual variance. Never throws.
[[nodiscard]] std::optional<Eigen::MatrixXd> unscaled_covariance(const Eigen::MatrixXd& jacobian);

}  // namespace veq::fit::detail
