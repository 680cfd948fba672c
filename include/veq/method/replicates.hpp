// SPDX-License-Identifier: MIT
// Replicate statistics: mean, SD, RSD, Student-t interval, Grubbs outlier flag.
#pragma once

#include <optional>
#include <span>
#include <string>
#include <vector>

namespace veq::method {

struct ReplicateStats {
  std::size_t n = 0;
  double mean = 0;
  double sd = 0;                  // sample SD (n - 1) [result unit]
  double rsd_percent = 0;         // 100 sd / |mean| [%]
  double ci95_low = 0;            // mean -/+ t(0.975, n-1) sd / sqrt(n)
  double ci95_high = 0;
  double grubbs_G = 0;            // max |x - mean| / sd
  double grubbs_critical = 0;     // two-sided, alpha (0 when n < 3)
  std::optional<std::size_t> outlier;  // index of the suspect value (flagged, never removed)
};

// Statistics of n values (n >= 1; with n = 1 only the mean is set).
[[nodiscard]] ReplicateStats replicate_stats(std::span<const double> values, double alpha = 0.05);

// Two-sided Grubbs critical value for n values at significance alpha:
// G = (n - 1)/sqrt(n) * sqrt(t^2 / (n - 2 + t^2)), t the upper alpha/(2n)
// quantile of Student's t with n - 2 degrees of freedom (Grubbs 1969,
// Technometrics 11, 1). Precondition: n >= 3.
[[nodiscard]] double grubbs_critical(std::size_t n, double alpha = 0.05);

// Group key of a run: its sample id, or the first capture of an ECMAScript
// regular expression applied to the file stem. Throws InputError for a bad pattern.
[[nodiscard]] std::string replicate_group(const std::string& sample_id, const std::string& file_stem,
                                          const std::string& pattern);

}  // namespace veq::method
