// SPDX-License-Identifier: MIT
// Replicate statistics (Boost.Math Student's t) and Grubbs' test.
#include "veq/method/replicates.hpp"

#include <boost/math/distributions/students_t.hpp>
#include <cmath>
#include <regex>

#include "veq/core/error.hpp"

namespace veq::method {

double grubbs_critical(std::size_t n, double alpha) {
  const double nn = static_cast<double>(n);
  boost::math::students_t dist(nn - 2.0);
  const double t = boost::math::quantile(boost::math::complement(dist, alpha / (2.0 * nn)));
  return (nn - 1.0) / std::sqrt(nn) * std::sqrt(t * t / (nn - 2.0 + t * t));
}

ReplicateStats replicate_stats(std::span<const double> x, double alpha) {
  ReplicateStats s;
  s.n = x.size();
  if (s.n == 0) return s;
  double sum = 0;
  for (double v : x) sum += v;
  s.mean = sum / static_cast<double>(s.n);
  s.ci95_low = s.ci95_high = s.mean;
  if (s.n < 2) return s;
  double ss = 0;
  for (double v : x) ss += (v - s.mean) * (v - s.mean);
  s.sd = std::sqrt(ss / static_cast<double>(s.n - 1));
  s.rsd_percent = s.mean != 0 ? 100.0 * s.sd / std::fabs(s.mean) : 0.0;
  boost::math::students_t dist(static_cast<double>(s.n - 1));
  const double t = boost::math::quantile(boost::math::complement(dist, 0.025));
  const double half = t * s.sd / std::sqrt(static_cast<double>(s.n));
  s.ci95_low = s.mean - half;
  s.ci95_high = s.mean + half;
  if (s.n >= 3) s.grubbs_critical = grubbs_critical(s.n, alpha);
  if (s.n >= 3 && s.sd > 0) {  // identical values: no outlier, G = 0
    std::size_t far = 0;
    for (std::size_t i = 1; i < s.n; ++i) {
      if (std::fabs(x[i] - s.mean) > std::fabs(x[far] - s.mean)) far = i;
    }
    s.grubbs_G = std::fabs(x[far] - s.mean) / s.sd;
    if (s.grubbs_G > s.grubbs_critical) s.outlier = far;
  }
  return s;
}

std::string replicate_group(const std::string& sample_id, const std::string& file_stem, const std::string& pattern) {
  if (pattern.empty()) return sample_id.empty() ? file_stem : sample_id;
  try {
    const std::regex re(pattern, std::regex::ECMAScript);
    std::smatch m;
    if (std::regex_search(file_stem, m, re) && m.size() > 1 && m[1].matched) return m[1].str();
    return file_stem;
  } catch (const std::regex_error& e) {
    throw InputError({"replicates.pattern", 0, 0}, "'" + pattern + "' is not a valid regular expression: " + e.what());
  }
}

}  // namespace veq::method
