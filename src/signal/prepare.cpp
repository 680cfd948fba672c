// SPDX-License-Identifier: MIT
// Prepare: duplicates, electrode calibration, spikes, noise.
#include "veq/signal/prepare.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "veq/core/constants.hpp"

namespace veq::signal {
namespace {

double median(std::vector<double> x) {
  if (x.empty()) return 0.0;
  const auto mid = x.begin() + static_cast<std::ptrdiff_t>(x.size() / 2);
  std::nth_element(x.begin(), mid, x.end());
  if (x.size() % 2 == 1) return *mid;
  const double hi = *mid;
  const double lo = *std::max_element(x.begin(), mid);
  return 0.5 * (lo + hi);
}

// Residual of point i from the line through i-1 and i+1, divided by its SD in units of the reading SD.
double neighbour_residual(std::span<const double> v, std::span<const double> y, std::size_t i) {
  const double a = (v[i] - v[i - 1]) / (v[i + 1] - v[i - 1]);
  const double line = (1.0 - a) * y[i - 1] + a * y[i + 1];
  return (y[i] - line) / std::sqrt(1.0 + a * a + (1.0 - a) * (1.0 - a));
}

}  // namespace

std::vector<std::string> PrepareOptions::validate() const {
  std::vector<std::string> p;
  if (!(spike_threshold_sd >= 3.0))
    p.push_back(fmt::format("spike_threshold_sd = {:g}: must be at least 3", spike_threshold_sd));
  if (!(min_noise_pH > 0.0)) p.push_back(fmt::format("min_noise_pH = {:g}: must be positive", min_noise_pH));
  if (electrode && !(std::fabs(electrode->slope_mV_per_pH) > 1.0)) {
    p.push_back(fmt::format("electrode slope = {:g} mV/pH: must not be zero", electrode->slope_mV_per_pH));
  }
  return p;
}

double estimate_noise(std::span<const double> v, std::span<const double> y) {
  const std::size_t n = v.size();
  if (n < 3) return 0.0;
  if (n < 7) {
    std::vector<double> r;
    for (std::size_t i = 1; i + 1 < n; ++i) r.push_back(std::fabs(neighbour_residual(v, y, i)));
    return 1.4826 * median(std::move(r));
  }
  // Residual of each reading from the least-squares parabola through its two
  // neighbours on each side (curvature of the curve cancels to second order),
  // scaled by its SD in units of the reading SD; only readings where the curve
  // is flatter than its median slope count, so that the jumps near endpoints,
  // where dynamic dosing crowds readings, do not pass for noise.
  std::vector<double> resid, slope;
  resid.reserve(n);
  slope.reserve(n);
  for (std::size_t i = 2; i + 2 < n; ++i) {
    const std::size_t idx[4] = {i - 2, i - 1, i + 1, i + 2};
    const double s = std::max(v[i + 2] - v[i - 2], 1e-12);
    double ata[3][3] = {}, w[4][3];
    for (int k = 0; k < 4; ++k) {
      const double x = (v[idx[k]] - v[i]) / s;
      w[k][0] = 1.0, w[k][1] = x, w[k][2] = x * x;
      for (int a = 0; a < 3; ++a)
        for (int b = 0; b < 3; ++b) ata[a][b] += w[k][a] * w[k][b];
    }
    // Intercept weights: first row of (A^T A)^-1 A^T, by Cramer's rule on the 3x3 system.
    const double det = ata[0][0] * (ata[1][1] * ata[2][2] - ata[1][2] * ata[2][1]) -
                       ata[0][1] * (ata[1][0] * ata[2][2] - ata[1][2] * ata[2][0]) +
                       ata[0][2] * (ata[1][0] * ata[2][1] - ata[1][1] * ata[2][0]);
    if (!(std::fabs(det) > 1e-18)) continue;
    const double c0 = (ata[1][1] * ata[2][2] - ata[1][2] * ata[2][1]) / det;
    const double c1 = -(ata[0][1] * ata[2][2] - ata[0][2] * ata[2][1]) / det;
    const double c2 = (ata[0][1] * ata[1][2] - ata[0][2] * ata[1][1]) / det;
    double pred = 0.0, var = 1.0;
    for (int k = 0; k < 4; ++k) {
      const double wk = c0 * w[k][0] + c1 * w[k][1] + c2 * w[k][2];
      pred += wk * y[idx[k]];
      var += wk * wk;
    }
    resid.push_back(std::fabs(y[i] - pred) / std::sqrt(var));
    slope.push_back(std::fabs(y[i + 1] - y[i - 1]) / std::max(v[i + 1] - v[i - 1], 1e-12));
  }
  if (resid.empty()) return 0.0;
  const double cut = median(slope);
  std::vector<double> flat;
  for (std::size_t k = 0; k < resid.size(); ++k) {
    if (slope[k] <= cut) flat.push_back(resid[k]);
  }
  // 1.4826 * MAD is the SD of a Gaussian (the MAD's consistency constant).
  return 1.4826 * median(std::move(flat));
}

ElectrodeCalibration calibration_from_buffers(
    double pH1, double E1_mV, double pH2, double E2_mV, double temperature_C) {
  if (std::fabs(pH1 - pH2) < 0.5) {
    throw InputError({"--buffers", 0, 0},
                     fmt::format("buffers pH {:g} and {:g} are too close", pH1, pH2),
                     "use two buffers at least 2 pH units apart that bracket the sample");
  }
  const double slope = (E1_mV - E2_mV) / (pH2 - pH1);
  const double nernst = nernst_slope_mV(temperature_C);
  if (std::fabs(slope) < kMinSlopeFraction * nernst || std::fabs(slope) > kMaxSlopeFraction * nernst) {
    throw InputError({"--buffers", 0, 0},
                     fmt::format("buffer readings give a slope of {:.1f} mV/pH ({:.0f} % of the Nernst slope {:.2f})",
                                 slope,
                                 100.0 * slope / nernst,
                                 nernst),
                     "check the buffer values and readings; a working electrode gives 90-102 %");
  }
  ElectrodeCalibration cal;
  cal.slope_mV_per_pH = slope;  // may be negative for an inverted-sign meter
  cal.e0_mV = E1_mV + slope * pH1;
  cal.temperature_C = temperature_C;
  cal.source = "buffers";
  return cal;
}

Curve prepare(const Run& run, const PrepareOptions& options) {
  Curve c;
  c.signal = run.signal;
  c.warnings = {};
  const std::string& file = run.source;
  if (run.facts.temperature_C) {
    c.temperature_C = *run.facts.temperature_C;
    c.temperature_known = true;
  }

  // Merge readings at equal volume (a titrator often logs several at the start).
  const std::size_t n_in = run.volume_mL.size();
  c.volume_mL.reserve(n_in);
  c.value.reserve(n_in);
  c.line.reserve(n_in);
  std::size_t merged = 0;
  std::size_t first_merge_line = 0;
  for (std::size_t i = 0; i < n_in;) {
    std::size_t j = i + 1;
    double sum = run.signal_values[i];
    while (j < n_in && run.volume_mL[j] == run.volume_mL[i]) sum += run.signal_values[j++];
    if (j - i > 1) {
      merged += j - i - 1;
      if (first_merge_line == 0) first_merge_line = run.line[i];
    }
    c.volume_mL.push_back(run.volume_mL[i]);
    c.value.push_back(sum / static_cast<double>(j - i));
    c.line.push_back(run.line[i]);
    i = j;
  }
  if (merged > 0) {
    c.warnings.push_back({"duplicates_merged",
                          fmt::format("{} readings at a volume already read were merged into their mean", merged),
                          {file, first_merge_line, 0}});
  }
  c.resolution = run.signal_resolution;

  // mV -> pH through a calibration, when one is known.
  std::optional<ElectrodeCalibration> cal = options.electrode ? options.electrode : run.facts.electrode;
  if (cal && cal->at_run_temperature) {
    // No temperature of its own: the calibration holds at the run's (its Nernstian slope too).
    cal->temperature_C = c.temperature_C;
    if (cal->nernst_fraction) cal->slope_mV_per_pH = nernst_slope_mV(c.temperature_C) * *cal->nernst_fraction;
  }
  if (run.signal == SignalKind::mv && cal) {
    // Temperature compensation keeps the isopotential point at pH 7 (common
    // practice for combination glass electrodes, no source) and scales the slope
    // with absolute temperature (Nernst).
    const double t_run = c.temperature_C;
    const double scale = (t_run + constants::kZeroCelsius) / (cal->temperature_C + constants::kZeroCelsius);
    const double slope = cal->slope_mV_per_pH * scale;
    const double e7 = cal->e0_mV - cal->slope_mV_per_pH * 7.0;
    for (double& y : c.value) y = 7.0 + (e7 - y) / slope;
    c.resolution = run.signal_resolution / std::fabs(slope);
    c.signal = SignalKind::ph;
    c.converted_from_mv = true;
  } else if (run.signal == SignalKind::mv) {
    c.warnings.push_back({"no_calibration",
                          "potential readings without an electrode calibration: endpoints are found on mV",
                          {file, 0, 0}});
  }

  c.spike.assign(c.volume_mL.size(), 0);
  const double floor = c.signal == SignalKind::ph ? options.min_noise_pH : options.min_noise_pH * 60.0;
  const double quantisation = c.resolution / std::sqrt(12.0);  // SD of rounding to the last digit
  // A short run has too few flat stretches to measure its noise: assume a
  // typical reading repeatability instead.
  const double nominal = c.signal == SignalKind::ph ? kNominalNoise_pH : kNominalNoise_pH * 59.16;
  auto measured = [&](std::span<const double> v, std::span<const double> y) {
    return v.size() >= kMinReadingsForNoise ? estimate_noise(v, y) : nominal;
  };
  c.noise_sd = std::max({measured(c.volume_mL, c.value), floor, quantisation});

  // Isolated spikes: far off the line through their neighbours, against the trend,
  // while the neighbours agree with each other.
  const std::size_t n = c.volume_mL.size();
  std::size_t spikes = 0;
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double r = neighbour_residual(c.volume_mL, c.value, i);
    const double left = c.value[i] - c.value[i - 1];
    const double right = c.value[i + 1] - c.value[i];
    const double span = std::fabs(c.value[i + 1] - c.value[i - 1]);
    if (std::fabs(r) > options.spike_threshold_sd * c.noise_sd && left * right < 0 && span < 0.5 * std::fabs(r)) {
      c.spike[i] = 1;
      ++spikes;
      if (spikes <= 10) {
        c.warnings.push_back(
            {"spike",
             fmt::format("reading {:g} at {:g} mL is an isolated spike ({:.2g} {} off its neighbours); "
                         "kept, but not used for endpoints",
                         c.value[i],
                         c.volume_mL[i],
                         std::fabs(r),
                         to_string(c.signal)),
             {file, c.line[i], 0}});
      }
    }
  }
  if (spikes > 10) {
    c.warnings.push_back({"spike", fmt::format("{} spikes in all", spikes), {file, 0, 0}});
  }
  if (spikes > 0) {
    // The noise estimate should not include the spikes.
    std::vector<double> v, y;
    for (std::size_t i = 0; i < n; ++i) {
      if (c.spike[i] == 0) v.push_back(c.volume_mL[i]), y.push_back(c.value[i]);
    }
    c.noise_sd = std::max({measured(v, y), floor, quantisation});
  }

  // Direction of the curve, from the first and last good points.
  std::size_t a = 0, b = n - 1;
  while (a < n && c.spike[a]) ++a;
  while (b > a && c.spike[b]) --b;
  const double change = c.value[b] - c.value[a];
  c.direction = change >= 0 ? +1 : -1;
  if (std::fabs(change) < 10.0 * c.noise_sd) {
    c.warnings.push_back({"flat_curve",
                          fmt::format("the signal changes by only {:.3g} {} over the run", change, to_string(c.signal)),
                          {file, 0, 0}});
  }
  if (c.signal == SignalKind::ph && run.facts.titrant_kind != TitrantKind::unknown) {
    const int expected = run.facts.titrant_kind == TitrantKind::base ? +1 : -1;
    if (expected != c.direction && std::fabs(change) >= 10.0 * c.noise_sd) {
      c.warnings.push_back({"direction",
                            fmt::format("pH {} although the titrant is an {}",
                                        c.direction > 0 ? "rises" : "falls",
                                        to_string(run.facts.titrant_kind)),
                            {file, 0, 0}});
    }
  }
  return c;
}

}  // namespace veq::signal
