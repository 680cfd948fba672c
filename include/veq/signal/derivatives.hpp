// SPDX-License-Identifier: MIT
// First and second derivatives of a titration curve on unevenly spaced volumes.
#pragma once

#include <span>
#include <vector>

namespace veq::signal {

// First derivative at the midpoints of consecutive readings, second derivative
// at the interior readings.
struct Derivatives {
  std::vector<double> mid_mL;  // (v[i] + v[i+1]) / 2, n-1 values [mL]
  std::vector<double> d1;      // dy/dV at mid_mL [unit/mL]
  std::vector<double> d1_sd;   // SD of each d1 from the reading noise [unit/mL]
  std::vector<double> at_mL;   // v[1] .. v[n-2] [mL]
  std::vector<double> d2;      // d2y/dV2 at at_mL: (d1[i] - d1[i-1]) / (mid[i] - mid[i-1]) [unit/mL^2]
  int window_points = 2;       // readings used for each d1
};

// Derivatives by local polynomial regression: each d1 value is the slope, at
// the midpoint of readings i and i+1, of a least-squares fit over
// window_points readings centred on that interval (window 2: the difference
// quotient; 4, 6, ...: a quadratic). Windows are shifted inward at the ends.
// Precondition: v strictly ascending, v.size() == y.size() >= 2, window_points
// even and >= 2. noise_sd [unit of y] sets d1_sd.
[[nodiscard]] Derivatives derivatives(std::span<const double> v, std::span<const double> y, int window_points,
                                      double noise_sd);

// How tall the run's highest derivative value must stand, in SDs of its
// noise, for a window to be wide enough [-].
inline constexpr double kWindowTargetSnr = 40.0;

// The window the data call for: the narrowest of 2, 4, 6, 8 readings (at most
// n/4) at which the highest value of direction x dy/dV is kWindowTargetSnr
// noise SDs tall; when none is, the window where it stands tallest. A narrow
// window keeps sharp jumps sharp; a wider one lifts a broad peak out of the
// noise of closely spaced readings.
[[nodiscard]] int auto_window(std::span<const double> v, std::span<const double> y, double noise_sd, int direction);


}  // namespace veq::signal
