// SPDX-License-Identifier: MIT
// Preparing a run for endpoint detection: merge duplicates, calibrate mV, flag spikes, estimate noise.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <vector>

#include "veq/core/run.hpp"

namespace veq::signal {

struct PrepareOptions {
  // Electrode calibration used to convert mV to pH; overrides one from the
  // run's metadata. Without any, a mV run stays in mV.
  std::optional<ElectrodeCalibration> electrode;
  // A reading is an isolated spike when it lies more than this many noise SDs
  // off the straight line through its two neighbours, against the trend of the
  // curve, while the neighbours agree with each other [noise SDs].
  double spike_threshold_sd = 8.0;
  // Floor of the noise estimate [pH] (for mV runs: [mV] = 60 x this).
  double min_noise_pH = 1e-4;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// Builds the Curve: readings with equal volume merged (their mean), mV
// converted to pH when a calibration is known, isolated spikes flagged (kept,
// but marked so that endpoint detection skips them), noise estimated.
// Precondition: run came from ingest (at least two distinct volumes, ascending).
[[nodiscard]] Curve prepare(const Run& run, const PrepareOptions& options = {});

// Plausible electrode slopes as a fraction of the Nernst slope: a working
// glass electrode gives 0.90-1.02, and one below 0.80 is usually replaced
// (common practice, no source).
inline constexpr double kMinSlopeFraction = 0.80;
inline constexpr double kMaxSlopeFraction = 1.10;

// Runs with fewer readings than this get the nominal noise instead of an
// estimate: the residual method needs flat stretches a short run lacks.
inline constexpr std::size_t kMinReadingsForNoise = 20;
// Nominal reading noise: the 0.01 pH resolution of a laboratory meter as a
// rounding SD, doubled for electrode noise (REFERENCES §10: meter 0.01 pH;
// routine pH rarely better than ±0.02) [pH].
inline constexpr double kNominalNoise_pH = 0.006;

// Calibration from two buffers (pH1 read as E1 mV, pH2 as E2 mV) at temperature_C.
// Throws InputError when the buffers are equal or the slope is implausible.
[[nodiscard]] ElectrodeCalibration calibration_from_buffers(double pH1, double E1_mV, double pH2, double E2_mV,
                                                            double temperature_C);

// Robust noise SD of y over volume v [unit of y]: the median absolute deviation of
// each point from the line through its neighbours, scaled to a Gaussian SD.
// Returns 0 for fewer than 3 points.
[[nodiscard]] double estimate_noise(std::span<const double> v, std::span<const double> y);

}  // namespace veq::signal
