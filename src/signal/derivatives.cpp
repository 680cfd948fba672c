// SPDX-License-Identifier: MIT
// Local polynomial regression derivatives on uneven volume grids.
#include "veq/signal/derivatives.hpp"

#include <algorithm>
#include <cassert>
#include <cmath>

#include <Eigen/Dense>

namespace veq::signal {

Derivatives derivatives(std::span<const double> v, std::span<const double> y, int window_points, double noise_sd) {
  assert(v.size() == y.size() && v.size() >= 2);
  assert(window_points >= 2 && window_points % 2 == 0);
  const std::size_t n = v.size();
  Derivatives d;
  d.window_points = window_points;
  d.mid_mL.resize(n - 1);
  d.d1.resize(n - 1);
  d.d1_sd.resize(n - 1);
  const std::size_t w = std::min<std::size_t>(static_cast<std::size_t>(window_points), n);
  const std::size_t half = w / 2;
  for (std::size_t i = 0; i + 1 < n; ++i) {
    const double m = 0.5 * (v[i] + v[i + 1]);
    d.mid_mL[i] = m;
    if (w <= 2 || n < 4) {
      const double h = v[i + 1] - v[i];
      d.d1[i] = (y[i + 1] - y[i]) / h;
      d.d1_sd[i] = noise_sd * std::sqrt(2.0) / h;
      continue;
    }
    // Window of w readings centred on the interval, shifted inward at the ends.
    std::size_t lo = i + 1 >= half ? i + 1 - half : 0;
    if (lo + w > n) lo = n - w;
    // Quadratic in the scaled offset x = (v - m) / s for conditioning.
    const double s = std::max(v[lo + w - 1] - v[lo], 1e-12);
    Eigen::Matrix3d ata = Eigen::Matrix3d::Zero();
    Eigen::Vector3d aty = Eigen::Vector3d::Zero();
    for (std::size_t k = lo; k < lo + w; ++k) {
      const double x = (v[k] - m) / s;
      const Eigen::Vector3d row(1.0, x, x * x);
      ata += row * row.transpose();
      aty += row * y[k];
    }
    const Eigen::LDLT<Eigen::Matrix3d> ldlt(ata);
    const Eigen::Vector3d coef = ldlt.solve(aty);
    const Eigen::Matrix3d inv = ldlt.solve(Eigen::Matrix3d::Identity());
    d.d1[i] = coef[1] / s;
    d.d1_sd[i] = noise_sd * std::sqrt(std::max(inv(1, 1), 0.0)) / s;
  }
  if (n >= 3) {
    d.at_mL.resize(n - 2);
    d.d2.resize(n - 2);
    for (std::size_t i = 1; i + 1 < n; ++i) {
      d.at_mL[i - 1] = v[i];
      d.d2[i - 1] = (d.d1[i] - d.d1[i - 1]) / (d.mid_mL[i] - d.mid_mL[i - 1]);
    }
  }
  return d;
}

int auto_window(std::span<const double> v, std::span<const double> y, double noise_sd, int direction) {
  const std::size_t n = v.size();
  if (n < 8) return 2;
  const int cap = std::max(2, static_cast<int>(n / 4) / 2 * 2);
  int best_w = 2;
  double best_snr = -1.0;
  for (int w = 2; w <= std::min(8, cap); w += 2) {
    const Derivatives d = derivatives(v, y, w, noise_sd);
    double top = 0.0;
    for (std::size_t i = 0; i < d.d1.size(); ++i) {
      if (d.d1_sd[i] > 0) top = std::max(top, direction * d.d1[i] / d.d1_sd[i]);
      else if (direction * d.d1[i] > 0) top = 1e300;
    }
    if (top >= kWindowTargetSnr) return w;
    if (top > best_snr) best_snr = top, best_w = w;
  }
  return best_w;
}

}  // namespace veq::signal
