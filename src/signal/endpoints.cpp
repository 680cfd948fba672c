// SPDX-License-Identifier: MIT
// Derivative endpoints: peak acceptance, sub-step interpolation, uncertainty, flags, endpoint level.
#include "veq/signal/endpoints.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>
#include <numeric>

#include "veq/core/constants.hpp"

namespace veq::signal {
namespace {

using constants::kLn10;

double median_of(std::vector<double> x) {
  if (x.empty()) return 0.0;
  auto mid = x.begin() + static_cast<std::ptrdiff_t>(x.size() / 2);
  std::nth_element(x.begin(), mid, x.end());
  return *mid;
}

// Vertex of the parabola through three points; nullopt when it opens upward.
std::optional<double> parabola_vertex(double x0, double y0, double x1, double y1, double x2, double y2) {
  const double f01 = (y1 - y0) / (x1 - x0);
  const double f12 = (y2 - y1) / (x2 - x1);
  const double a = (f12 - f01) / (x2 - x0);
  if (!(a < 0.0)) return std::nullopt;
  const double b = f01 - a * (x0 + x1);
  return std::clamp(-b / (2.0 * a), x0, x2);
}

struct Estimate {
  double v1;
  double v2;
};

// First-derivative vertex and second-derivative zero crossing for the peak at
// midpoint j, from the three derivative heights around it (h = direction * d1).
Estimate estimate(const Derivatives& d, std::span<const double> v, std::size_t j, double hl, double hc, double hr) {
  const double x0 = d.mid_mL[j - 1], x1 = d.mid_mL[j], x2 = d.mid_mL[j + 1];
  const double v1 = parabola_vertex(x0, hl, x1, hc, x2, hr).value_or(x1);
  // d2 at v[j] (between midpoints j-1 and j) and at v[j+1] (between j and j+1).
  const double p = (hc - hl) / (x1 - x0);
  const double q = (hr - hc) / (x2 - x1);
  double v2 = 0.5 * (v[j] + v[j + 1]);
  if (p >= 0 && q < 0) v2 = v[j] + (v[j + 1] - v[j]) * p / (p - q);
  return {v1, v2};
}

// The level (pH, or pH-like mV/s) at the endpoint from the readings around the
// jump, by the local model sinh(ln10 (u - p)) = a + b V: the form that both
// branches of a titration curve take near an equivalence point, whether the
// titrated species is strong or weak (see DEVELOPERS.md, "Endpoint level").
// Returns nullopt when the model does not describe the readings.
std::optional<double> local_level(
    std::span<const double> v, std::span<const double> u, std::size_t lo, std::size_t hi, double v_ep, double noise_u) {
  std::size_t before = 0, after = 0;
  for (std::size_t i = lo; i <= hi; ++i) (v[i] < v_ep ? before : after)++;
  if (before < 2 || after < 2) return std::nullopt;
  const double umin =
      *std::min_element(u.begin() + static_cast<std::ptrdiff_t>(lo), u.begin() + static_cast<std::ptrdiff_t>(hi) + 1);
  const double umax =
      *std::max_element(u.begin() + static_cast<std::ptrdiff_t>(lo), u.begin() + static_cast<std::ptrdiff_t>(hi) + 1);
  if (!(umax - umin > 0.5)) return std::nullopt;  // no jump to speak of
  const double vs = std::max(v[hi] - v[lo], 1e-12);
  const double vc = v_ep;

  // For a level p: fit a, b (weighted linear in z, then Gauss-Newton in u); return the SSE in u.
  auto sse = [&](double p, double* a_out, double* b_out) {
    double sw = 0, sx = 0, sz = 0, sxx = 0, sxz = 0;
    for (std::size_t i = lo; i <= hi; ++i) {
      const double t = kLn10 * (u[i] - p);
      if (std::fabs(t) > 300) continue;
      const double z = std::sinh(t);
      const double w = 1.0 / (1.0 + z * z);  // 1 / cosh^2(t)
      const double x = (v[i] - vc) / vs;
      sw += w, sx += w * x, sz += w * z, sxx += w * x * x, sxz += w * x * z;
    }
    const double det = sw * sxx - sx * sx;
    if (!(std::fabs(det) > 0)) return 1e300;
    double b = (sw * sxz - sx * sz) / det;
    double a = (sz - b * sx) / sw;
    for (int it = 0; it < 4; ++it) {
      double j11 = 0, j12 = 0, j22 = 0, g1 = 0, g2 = 0;
      for (std::size_t i = lo; i <= hi; ++i) {
        const double x = (v[i] - vc) / vs;
        const double s = a + b * x;
        const double pred = p + std::asinh(s) / kLn10;
        const double dpred = 1.0 / (kLn10 * std::sqrt(1.0 + s * s));
        const double r = u[i] - pred;
        j11 += dpred * dpred, j12 += dpred * dpred * x, j22 += dpred * dpred * x * x;
        g1 += dpred * r, g2 += dpred * x * r;
      }
      const double dd = j11 * j22 - j12 * j12;
      if (!(std::fabs(dd) > 0)) break;
      a += (j22 * g1 - j12 * g2) / dd;
      b += (j11 * g2 - j12 * g1) / dd;
    }
    double total = 0;
    for (std::size_t i = lo; i <= hi; ++i) {
      const double x = (v[i] - vc) / vs;
      const double r = u[i] - (p + std::asinh(a + b * x) / kLn10);
      total += r * r;
    }
    if (a_out) *a_out = a;
    if (b_out) *b_out = b;
    return std::isfinite(total) ? total : 1e300;
  };

  // Coarse grid, then golden-section refinement around the best grid point.
  constexpr int kGrid = 40;
  double best_p = umin, best = 1e300;
  for (int k = 1; k < kGrid; ++k) {
    const double p = umin + (umax - umin) * k / kGrid;
    const double s = sse(p, nullptr, nullptr);
    if (s < best) best = s, best_p = p;
  }
  double lo_p = best_p - (umax - umin) / kGrid, hi_p = best_p + (umax - umin) / kGrid;
  const double g = 0.5 * (std::sqrt(5.0) - 1.0);
  double c1 = hi_p - g * (hi_p - lo_p), c2 = lo_p + g * (hi_p - lo_p);
  double f1 = sse(c1, nullptr, nullptr), f2 = sse(c2, nullptr, nullptr);
  for (int it = 0; it < 60 && hi_p - lo_p > 1e-6; ++it) {
    if (f1 < f2) {
      hi_p = c2, c2 = c1, f2 = f1;
      c1 = hi_p - g * (hi_p - lo_p);
      f1 = sse(c1, nullptr, nullptr);
    } else {
      lo_p = c1, c1 = c2, f1 = f2;
      c2 = lo_p + g * (hi_p - lo_p);
      f2 = sse(c2, nullptr, nullptr);
    }
  }
  const double p = 0.5 * (lo_p + hi_p);
  double a = 0, b = 0;
  const double s = sse(p, &a, &b);
  const std::size_t count = hi - lo + 1;
  const double rms = std::sqrt(s / static_cast<double>(count));
  if (!(p > umin && p < umax) || !(rms <= std::max(5.0 * noise_u, 0.15)) || !std::isfinite(p)) return std::nullopt;
  return p;
}

double interpolate(std::span<const double> v, std::span<const double> y, double x) {
  auto it = std::upper_bound(v.begin(), v.end(), x);
  if (it == v.begin()) return y.front();
  if (it == v.end()) return y.back();
  const std::size_t i = static_cast<std::size_t>(it - v.begin());
  const double t = (x - v[i - 1]) / (v[i] - v[i - 1]);
  return y[i - 1] + t * (y[i] - y[i - 1]);
}

}  // namespace

std::vector<std::string> EndpointOptions::validate() const {
  std::vector<std::string> p;
  if (window_points != 0 && (window_points < 2 || window_points % 2 != 0 || window_points > 50)) {
    p.push_back(fmt::format("window_points = {}: must be 0 (auto) or an even number from 2 to 50", window_points));
  }
  if (!(min_relative_height >= 0.0 && min_relative_height < 1.0)) {
    p.push_back(fmt::format("min_relative_height = {:g}: must be in [0, 1)", min_relative_height));
  }
  if (!(min_prominence >= 0.0 && min_prominence <= 1.0)) {
    p.push_back(fmt::format("min_prominence = {:g}: must be in [0, 1]", min_prominence));
  }
  if (!(min_snr >= 0.0)) p.push_back(fmt::format("min_snr = {:g}: must be 0 or more", min_snr));
  if (!(min_separation_mL >= 0.0))
    p.push_back(fmt::format("min_separation_mL = {:g}: must be 0 or more", min_separation_mL));
  if (max_endpoints < 1) p.push_back(fmt::format("max_endpoints = {}: must be at least 1", max_endpoints));
  return p;
}

EndpointResult find_endpoints(const Curve& curve, const EndpointOptions& options, const std::string& file) {
  EndpointResult out;
  std::vector<double> v, y;
  v.reserve(curve.volume_mL.size());
  y.reserve(curve.volume_mL.size());
  for (std::size_t i = 0; i < curve.volume_mL.size(); ++i) {
    if (i < curve.spike.size() && curve.spike[i]) continue;
    v.push_back(curve.volume_mL[i]);
    y.push_back(curve.value[i]);
  }
  const std::size_t n = v.size();
  if (n < 5) {
    out.warnings.push_back({"too_few_readings",
                            fmt::format("only {} usable readings; at least 5 are needed to find an endpoint", n),
                            {file, 0, 0}});
    return out;
  }
  const int window =
      options.window_points > 0 ? options.window_points : auto_window(v, y, curve.noise_sd, curve.direction);
  out.derivatives = derivatives(v, y, window, curve.noise_sd);
  const Derivatives& d = out.derivatives;
  const std::size_t m = d.d1.size();
  const double s = curve.direction;
  std::vector<double> h(m);
  for (std::size_t i = 0; i < m; ++i) h[i] = s * d.d1[i];

  std::vector<double> steps(n - 1);
  for (std::size_t i = 0; i + 1 < n; ++i) steps[i] = v[i + 1] - v[i];
  const double med_step = median_of(steps);
  out.min_separation_mL = options.min_separation_mL > 0 ? options.min_separation_mL : 3.0 * med_step;

  const double top = *std::max_element(h.begin(), h.end());
  if (!(top > 0)) {
    out.warnings.push_back({"no_endpoint", "no endpoint: the signal never moves in the run's direction", {file, 0, 0}});
    return out;
  }
  struct Peak {
    std::size_t j;
    double height;
    double snr;
  };
  // Valley on each side of every point: the lowest (clamped at 0) derivative
  // between it and the nearest higher one (or the end of the data), in O(n)
  // with a monotonic stack; a peak's prominence is its height above the higher
  // of its two valleys.
  auto valleys = [&](bool from_left) {
    std::vector<double> valley(m);
    std::vector<std::pair<std::size_t, double>> stack;  // index, lowest value since the entry below it
    for (std::size_t step = 0; step < m; ++step) {
      const std::size_t j = from_left ? step : m - 1 - step;
      double low = std::max(h[j], 0.0);
      while (!stack.empty() && h[stack.back().first] <= h[j]) {
        low = std::min(low, stack.back().second);
        stack.pop_back();
      }
      valley[j] = low;
      stack.emplace_back(j, low);
    }
    return valley;
  };
  const std::vector<double> left_valley = valleys(true);
  const std::vector<double> right_valley = valleys(false);
  std::vector<Peak> cands;
  bool edge_steepest = false;
  for (std::size_t j = 0; j < m; ++j) {
    if (!(h[j] > 0)) continue;
    if (j > 0 && h[j] < h[j - 1]) continue;
    if (j + 1 < m && !(h[j] > h[j + 1])) continue;
    if (j == 0 || j + 1 == m) {
      // No reading beyond it on one side: cannot tell a peak from a rising flank.
      if (j + 1 == m && j > 0 && h[j] >= 0.5 * top) edge_steepest = true;
      continue;
    }
    if (h[j] < options.min_relative_height * top) continue;
    const double prominence = h[j] - std::max(left_valley[j], right_valley[j]);
    if (prominence < options.min_prominence * h[j]) continue;
    // Both the peak and its rise above the valleys must stand out of the noise: a noise
    // bump on a sloping buffer region is tall but not prominent.
    const double snr = d.d1_sd[j] > 0 ? h[j] / d.d1_sd[j] : 1e9;
    const double prominence_snr = d.d1_sd[j] > 0 ? prominence / d.d1_sd[j] : 1e9;
    if (snr < options.min_snr || prominence_snr < options.min_snr) continue;
    cands.push_back({j, h[j], snr});
  }
  std::sort(cands.begin(), cands.end(), [](const Peak& a, const Peak& b) { return a.height > b.height; });
  std::vector<Peak> accepted;
  for (const Peak& c : cands) {
    if (static_cast<int>(accepted.size()) >= options.max_endpoints) break;
    const bool near = std::any_of(accepted.begin(), accepted.end(), [&](const Peak& a) {
      return std::fabs(d.mid_mL[a.j] - d.mid_mL[c.j]) < out.min_separation_mL;
    });
    if (!near) accepted.push_back(c);
  }
  std::sort(accepted.begin(), accepted.end(), [](const Peak& a, const Peak& b) { return a.j < b.j; });

  // Levels in pH-like units for the local model: mV divided by the Nernst slope.
  const double unit_scale = curve.signal == SignalKind::mv ? nernst_slope_mV(curve.temperature_C) : 1.0;
  std::vector<double> u(y.size());
  for (std::size_t i = 0; i < y.size(); ++i) u[i] = y[i] / unit_scale;

  int index = 0;
  for (const Peak& pk : accepted) {
    const std::size_t j = pk.j;
    Endpoint e;
    e.index = ++index;
    const double hl = h[j - 1], hc = h[j], hr = h[j + 1];
    const Estimate est = estimate(d, v, j, hl, hc, hr);
    e.first_derivative_mL = est.v1;
    e.second_derivative_mL = est.v2;
    e.volume_mL = 0.5 * (est.v1 + est.v2);
    e.peak_slope = hc;
    e.snr = pk.snr;

    // Uncertainty: disagreement of the two estimates, where in the dosing step
    // the jump lies (rectangular over the step, reduced as the peak is resolved
    // by its neighbours), and the reading noise propagated through both estimates.
    const double step = v[j + 1] - v[j];
    const double sharp = std::clamp((std::max(hl, 0.0) + std::max(hr, 0.0)) / (2.0 * hc), 0.0, 1.0);
    const double u_step = step / std::sqrt(12.0) * (1.0 - sharp);
    auto vol = [&](double a, double b, double c) {
      const Estimate x = estimate(d, v, j, a, b, c);
      return 0.5 * (x.v1 + x.v2);
    };
    double u_noise2 = 0.0;
    const double sds[3] = {d.d1_sd[j - 1], d.d1_sd[j], d.d1_sd[j + 1]};
    for (int k = 0; k < 3; ++k) {
      double a[3] = {hl, hc, hr}, b[3] = {hl, hc, hr};
      a[k] += sds[k];
      b[k] -= sds[k];
      const double shift = 0.5 * (vol(a[0], a[1], a[2]) - vol(b[0], b[1], b[2]));
      u_noise2 += shift * shift;
    }
    const double half_diff = 0.5 * (est.v1 - est.v2);
    e.uncertainty_mL = std::sqrt(half_diff * half_diff + u_step * u_step + u_noise2);
    e.derivative_volume_mL = e.volume_mL;
    e.derivative_uncertainty_mL = e.uncertainty_mL;

    // Flags.
    const auto after_it = std::upper_bound(v.begin(), v.end(), e.volume_mL);
    const auto before_n = static_cast<std::size_t>(after_it - v.begin());
    const std::size_t after_n = n - before_n;
    // At the edge: fewer than 3 readings beyond it, or, for the first and last
    // endpoint, the curve still over half as steep where the data begin or end.
    const bool first = &pk == &accepted.front();
    const bool last = &pk == &accepted.back();
    const bool still_steep = (first && h.front() > 0.5 * hc) || (last && h.back() > 0.5 * hc);
    if (before_n < 3 || after_n < 3 || still_steep) e.flags.emplace_back(kFlagEdge);
    if (step > 3.0 * med_step) e.flags.emplace_back(kFlagFewPoints);
    if (pk.snr < 2.0 * options.min_snr || std::fabs(est.v1 - est.v2) > step) e.flags.emplace_back(kFlagNoisy);

    // Level at the endpoint: local model over the jump and a few readings either side.
    std::size_t L = j, R = j;
    while (L > 0 && h[L - 1] >= 0.5 * hc) --L;
    while (R + 1 < m && h[R + 1] >= 0.5 * hc) ++R;
    std::size_t lo = L >= 2 ? L - 2 : 0;
    std::size_t hi = std::min(n - 1, R + 3);
    lo = std::max(lo, j >= 5 ? j - 5 : std::size_t{0});
    hi = std::min(hi, j + 6);
    if (auto level = local_level(v, u, lo, hi, e.volume_mL, curve.noise_sd / unit_scale)) {
      e.value = *level * unit_scale;
      e.value_method = "local_model";
    } else {
      e.value = interpolate(v, y, e.volume_mL);
      e.value_method = "interpolated";
    }
    out.endpoints.push_back(std::move(e));
  }
  if (out.endpoints.empty()) {
    std::string why = edge_steepest
                          ? "the steepest part of the curve is at the end of the data; the run may have stopped "
                            "before the endpoint"
                          : "no distinct derivative peak stands out of the noise";
    out.warnings.push_back({"no_endpoint", "no endpoint: " + why, {file, 0, 0}});
  } else if (edge_steepest) {
    out.warnings.push_back({"edge_rise",
                            "the curve is still steep at the end of the data: a further endpoint may lie beyond it",
                            {file, 0, 0}});
  }
  return out;
}

}  // namespace veq::signal
