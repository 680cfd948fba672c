// SPDX-License-Identifier: MIT
// Gran plots: weighted straight lines through linearised branches, window by a linearity rule.
#include "veq/signal/gran.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <boost/math/distributions/chi_squared.hpp>
#include <cmath>
#include <optional>

#include "veq/chem/activity.hpp"
#include "veq/chem/water.hpp"
#include "veq/core/constants.hpp"

namespace veq::signal {
namespace {

using constants::kLn10;

struct Fit {
  double a = 0, b = 0;                      // y = a + b x
  double var_a = 0, var_b = 0, cov_ab = 0;  // unscaled (weights as 1/sigma^2)
  double chi2 = 0;
  double r2 = 0;
  int n = 0;
  [[nodiscard]] double reduced() const { return n > 2 ? chi2 / (n - 2) : 1e300; }
};

// Weighted least squares on [lo, hi], two-pass (centred) for accuracy.
Fit fit_line(const std::vector<double>& x,
             const std::vector<double>& y,
             const std::vector<double>& w,
             std::size_t lo,
             std::size_t hi) {
  Fit f;
  f.n = static_cast<int>(hi - lo + 1);
  double sw = 0, sx = 0, sy = 0;
  for (std::size_t i = lo; i <= hi; ++i) sw += w[i], sx += w[i] * x[i], sy += w[i] * y[i];
  const double xm = sx / sw, ym = sy / sw;
  double sxx = 0, sxy = 0, syy = 0;
  for (std::size_t i = lo; i <= hi; ++i) {
    const double dx = x[i] - xm, dy = y[i] - ym;
    sxx += w[i] * dx * dx, sxy += w[i] * dx * dy, syy += w[i] * dy * dy;
  }
  if (!(sxx > 0)) {
    f.chi2 = 1e300;
    return f;
  }
  f.b = sxy / sxx;
  f.a = ym - f.b * xm;
  f.var_b = 1.0 / sxx;
  f.var_a = 1.0 / sw + xm * xm / sxx;
  f.cov_ab = -xm / sxx;
  double chi2 = 0;
  for (std::size_t i = lo; i <= hi; ++i) {
    const double r = y[i] - f.a - f.b * x[i];
    chi2 += w[i] * r * r;
  }
  f.chi2 = chi2;
  f.r2 = syy > 0 ? 1.0 - chi2 / syy : 1.0;
  return f;
}

// Wald-Wolfowitz runs test on residual signs: true when there are too few
// runs for chance (one-sided, 1 %), i.e. the residuals follow a curve.
bool residual_pattern(
    const std::vector<double>& x, const std::vector<double>& y, std::size_t lo, std::size_t hi, const Fit& f) {
  const std::size_t n = hi - lo + 1;
  if (n < 10) return false;
  int pos = 0, neg = 0, runs = 0, last = 0;
  for (std::size_t i = lo; i <= hi; ++i) {
    const double r = y[i] - f.a - f.b * x[i];
    const int s = r >= 0 ? 1 : -1;
    (s > 0 ? pos : neg)++;
    if (s != last) ++runs, last = s;
  }
  if (pos == 0 || neg == 0) return true;
  const double nn = static_cast<double>(n);
  const double mu = 2.0 * pos * neg / nn + 1.0;
  const double var = (mu - 1.0) * (mu - 2.0) / (nn - 1.0);
  if (!(var > 0)) return false;
  return (runs - mu) / std::sqrt(var) < -2.326;
}

double chi2_limit(int n) {
  // Accept a window whose reduced chi-square is below twice the 99 % point of
  // its distribution: the factor allows the noise estimate to be low by sqrt(2).
  const int dof = std::max(1, n - 2);
  // The quantile is a root search and the same window sizes recur in every run:
  // remember each value (per thread, so no locking; the values are the same).
  thread_local std::vector<double> cache;
  const auto k = static_cast<std::size_t>(dof);
  if (k < cache.size() && cache[k] > 0.0) return cache[k];
  boost::math::chi_squared dist(dof);
  const double limit = 2.0 * boost::math::quantile(dist, 0.99) / dof;
  if (k < 100000) {
    if (cache.size() <= k) cache.resize(k + 1, 0.0);
    cache[k] = limit;
  }
  return limit;
}

struct Series {
  std::vector<double> v, g, w;  // abscissa (volume, or effective volume), scaled Gran function, weight
  double u_ref = 0;
};

double davies_log_gamma(int z, double ionic_strength, double temperature_C) {
  return chem::davies_log10_gamma(z, ionic_strength, chem::debye_huckel_A(temperature_C));
}

struct Trimmed {
  Fit fit;
  std::size_t lo = 0, hi = 0;
  bool linear = false;
  bool ok = false;
};

// Weighted sums of a window's readings (uncentred), kept as readings leave it: enough to rank the two
// windows one reading shorter by reduced chi-square without a pass over them.
class WindowSums {
 public:
  WindowSums(const Series& s, std::size_t lo, std::size_t hi) {
    for (std::size_t i = lo; i <= hi; ++i) add(s, i, 1.0);
  }
  void remove(const Series& s, std::size_t i) { add(s, i, -1.0); }

  // Whether dropping reading lo leaves a lower reduced chi-square than dropping hi (what comparing
  // fit_line on the two windows says); nullopt where the sums cannot say it safely.
  [[nodiscard]] std::optional<bool> drop_low(const Series& s, std::size_t lo, std::size_t hi) const {
    const int n = static_cast<int>(hi - lo);  // readings left
    const std::optional<double> a = reduced_without(s, lo, n), b = reduced_without(s, hi, n);
    if (!a || !b) return std::nullopt;
    if (std::fabs(*a - *b) <= 1e-4 * std::max(*a, *b)) return std::nullopt;
    return *a < *b;
  }

 private:
  void add(const Series& s, std::size_t i, double sign) {
    const double w = sign * s.w[i], x = s.v[i], y = s.g[i];
    m_w += w, m_x += w * x, m_y += w * y, m_xx += w * x * x, m_xy += w * x * y, m_yy += w * y * y;
  }
  // The reduced chi-square of the line through the window without reading i (n readings left).
  [[nodiscard]] std::optional<double> reduced_without(const Series& s, std::size_t i, int n) const {
    if (n <= 2) return std::nullopt;
    const double w = s.w[i], x = s.v[i], y = s.g[i];
    const double W = m_w - w, X = m_x - w * x, Y = m_y - w * y;
    const double cxx = (m_xx - w * x * x) - X * X / W;
    const double cxy = (m_xy - w * x * y) - X * Y / W;
    const double cyy = (m_yy - w * y * y) - Y * Y / W;
    const double chi2 = cyy - cxy * cxy / cxx;
    // Left to the full fits: a degenerate window, or residuals below 1e-6 of the spread (the
    // difference of the sums then keeps too few digits).
    if (!(W > 0) || !(cxx > 0) || !(cyy > 0) || !std::isfinite(chi2) || !(chi2 > 1e-6 * cyy)) return std::nullopt;
    return chi2 / (n - 2);
  }
  double m_w = 0, m_x = 0, m_y = 0, m_xx = 0, m_xy = 0, m_yy = 0;
};

// Shrinks [lo, hi] from whichever end improves the fit more until the line
// passes the chi-square and runs rules; keeps the best window seen otherwise.
Trimmed trim(const Series& s, std::size_t lo, std::size_t hi, int min_points, bool fixed) {
  Trimmed best;
  double best_score = 1e300;
  // The fit of the next, shorter window is made when it is chosen: kept, not refitted.
  std::optional<Fit> next;
  WindowSums sums(s, lo, hi);
  while (static_cast<int>(hi - lo + 1) >= min_points) {
    const Fit f = next ? *next : fit_line(s.v, s.g, s.w, lo, hi);
    if (!(std::fabs(f.b) > 0) || !std::isfinite(f.a)) break;
    const double score = f.reduced() / chi2_limit(f.n);
    if (score < best_score) best_score = score, best = {f, lo, hi, false, true};
    // A residual pattern counts only when the residuals are not far below the noise
    // (reduced chi-square >= 0.25: an RMS of half the reading noise or more).
    const bool pattern = f.reduced() >= 0.25 && residual_pattern(s.v, s.g, lo, hi, f);
    if (fixed || (f.reduced() <= chi2_limit(f.n) && !pattern)) {
      return {f, lo, hi, !fixed || f.reduced() <= chi2_limit(f.n), true};
    }
    if (static_cast<int>(hi - lo) < min_points) break;
    // Which end to drop: the two shorter windows' reduced chi-squares from the window's running sums
    // (no pass over the readings); only where the sums cannot order them safely (within 1e-4 of each
    // other, or a fit so close that the sums' cancellation matters) are both fitted in full, as before.
    // The window kept is fitted in full either way.
    const std::optional<bool> by_sums = sums.drop_low(s, lo, hi);
    const bool drop_low =
        by_sums ? *by_sums
                : fit_line(s.v, s.g, s.w, lo + 1, hi).reduced() < fit_line(s.v, s.g, s.w, lo, hi - 1).reduced();
    sums.remove(s, drop_low ? lo : hi);
    if (drop_low)
      ++lo;
    else
      --hi;
    next = fit_line(s.v, s.g, s.w, lo, hi);
  }
  return best;
}

}  // namespace

std::string_view to_string(GranFunction f) {
  switch (f) {
    case GranFunction::excess_analyte:
      return "excess_analyte";
    case GranFunction::excess_titrant:
      return "excess_titrant";
    case GranFunction::buffer:
      return "buffer";
  }
  return "excess_analyte";
}

std::vector<std::string> GranOptions::validate() const {
  std::vector<std::string> p;
  if (window_mL && !(window_mL->first >= 0 && window_mL->second > window_mL->first)) {
    p.push_back(fmt::format(
        "gran window {:g}:{:g} mL: expected from < to, both 0 or more", window_mL->first, window_mL->second));
  }
  if (!(before_from >= 0 && before_from < before_to && before_to <= 1.0 && before_from < buffer_to &&
        buffer_to <= 1.0)) {
    p.push_back(fmt::format("gran before_from/before_to/buffer_to = {:g}/{:g}/{:g}: expected 0 <= from < to <= 1",
                            before_from,
                            before_to,
                            buffer_to));
  }
  if (!(max_offset > 0 && max_offset <= 1))
    p.push_back(fmt::format("gran max_offset = {:g}: expected (0, 1]", max_offset));
  if (!(after_from >= 0 && after_from < after_to)) {
    p.push_back(fmt::format("gran after_from/after_to = {:g}/{:g}: expected 0 <= from < to", after_from, after_to));
  }
  if (min_points < 3) p.push_back(fmt::format("gran min_points = {}: must be at least 3", min_points));
  if (analyte_charge && (*analyte_charge < -4 || *analyte_charge > 4)) {
    p.push_back(fmt::format("analyte_charge = {}: expected -4..4", *analyte_charge));
  }
  if (!(background_ionic_strength_mol_L >= 0 && background_ionic_strength_mol_L < 5)) {
    p.push_back(
        fmt::format("background ionic strength = {:g} mol/L: expected 0 to 5", background_ionic_strength_mol_L));
  }
  return p;
}

std::vector<GranEndpoint> gran_endpoints(const Curve& curve,
                                         const std::vector<Endpoint>& endpoints,
                                         const GranInputs& inputs,
                                         const GranOptions& options,
                                         std::vector<Diagnostic>& warnings,
                                         const std::string& file) {
  std::vector<GranEndpoint> out(endpoints.size());
  if (endpoints.empty()) return out;
  if (!inputs.sample_volume_mL) {
    warnings.push_back({"gran_skipped",
                        "Gran method skipped: the sample volume is not known (give --sample-volume, a method, or a "
                        "'Sample volume' line in the file)",
                        {file, 0, 0}});
    return out;
  }
  const double V0 = *inputs.sample_volume_mL;
  const int d = curve.direction;
  // u: pH, or for an uncalibrated mV run -E/s (rises with pH for the usual electrode sign).
  const bool mv = curve.signal == SignalKind::mv;
  const double s_mV = nernst_slope_mV(curve.temperature_C);
  std::vector<double> V, U;
  for (std::size_t i = 0; i < curve.volume_mL.size(); ++i) {
    if (i < curve.spike.size() && curve.spike[i]) continue;
    V.push_back(curve.volume_mL[i]);
    U.push_back(mv ? -curve.value[i] / s_mV : curve.value[i]);
  }
  // Direction of u: an mV curve that falls (pH rising, usual electrode sign) has u rising.
  const int ud = mv ? -d : d;
  const double sigma_u = std::max(mv ? curve.noise_sd / s_mV : curve.noise_sd, 1e-4);

  // Ionic strength along a branch, from the stoichiometry (documented in DEVELOPERS.md):
  // the titrant's counter-ion, the analyte's own singly charged counter-ions, the two
  // forms of step k in proportion to the segment fraction, and a background. Before the
  // first endpoint of a strong analyte and after the last one the ions are taken as
  // monovalent: Ct V_eq/(V0 + V) and Ct V/(V0 + V).
  const int z0 = options.analyte_charge.value_or(0);
  auto step_charges = [&](int step) {
    // (acid form, base form) of step k
    if (ud > 0) return std::pair<int, int>{z0 - (step - 1), z0 - step};
    return std::pair<int, int>{z0 + step, z0 + (step - 1)};
  };
  auto buffer_ionic = [&](double v, double x_eff, int step, double v_prev, double seg) {
    const double ct = *inputs.titrant_conc_mol_L;
    const double frac = std::clamp((x_eff - v_prev) / seg, 0.0, 1.0);
    const double c_an = ct * seg / (V0 + v);
    const auto [za, zb] = step_charges(step);
    // converted fraction: the base form for a base titrant, the acid form for an acid titrant
    const double forms =
        ud > 0 ? c_an * ((1 - frac) * za * za + frac * zb * zb) : c_an * ((1 - frac) * zb * zb + frac * za * za);
    return 0.5 * (ct * v / (V0 + v) + std::abs(z0) * c_an + forms) + options.background_ionic_strength_mol_L;
  };

  // Builds the scaled Gran series of one function over indices [lo, hi].
  // sign: -1 for 10^(-u) (excess acid / acid buffer for a rising u), +1 for 10^(u - 14).
  // A buffer branch of a calibrated run with a known titrant concentration uses
  // the effective volume V' = V + ud (V0 + V)([H+] - [OH-]) / Ct, the titrant
  // that went into converting the analyte, which makes G = (V' - V_prev) 10^(-/+pH)
  // exactly straight against V' (charge balance; see DEVELOPERS.md, "Gran's method").
  // With the activity correction each G also carries the Davies activity
  // coefficients, so that a changing ionic strength does not bend the line.
  const bool effective = !mv && inputs.titrant_conc_mol_L.has_value();
  const bool corrected = effective && options.activity_correction && options.analyte_charge.has_value();
  const double kw = std::pow(10.0, -chem::pKw(curve.temperature_C));
  struct Segment {
    int step = 1;       // 1-based endpoint index
    double v_prev = 0;  // previous equivalence volume [mL]
    double seg = 1;     // segment length [mL]
    double v_eq = 0;    // this equivalence volume [mL]
  };
  auto series = [&](GranFunction f, const Segment& sg, std::size_t lo, std::size_t hi, int sign, double* mean_ionic) {
    Series s;
    double mean_u = 0;
    for (std::size_t i = lo; i <= hi; ++i) mean_u += U[i];
    s.u_ref = mean_u / static_cast<double>(hi - lo + 1);
    double sum_ionic = 0;
    for (std::size_t i = lo; i <= hi; ++i) {
      double x = V[i];
      if (f == GranFunction::buffer && effective) {
        const double h = std::pow(10.0, -U[i]);
        x = V[i] + ud * (V0 + V[i]) * (h - kw / h) / *inputs.titrant_conc_mol_L;
      }
      const double pre = f == GranFunction::buffer ? (x - sg.v_prev) : (V0 + V[i]);
      double g = pre * std::pow(10.0, sign * (U[i] - s.u_ref));
      if (corrected) {
        const double ct = *inputs.titrant_conc_mol_L;
        double ionic = 0;
        if (f == GranFunction::buffer) {
          ionic = buffer_ionic(V[i], x, sg.step, sg.v_prev, sg.seg);
          const auto [za, zb] = step_charges(sg.step);
          const double lg =
              davies_log_gamma(zb, ionic, inputs.temperature_C) - davies_log_gamma(za, ionic, inputs.temperature_C);
          g *= std::pow(10.0, ud > 0 ? lg : -lg);  // x gamma_B/gamma_A (base titrant) or gamma_A/gamma_B
        } else {
          const double v_ions = f == GranFunction::excess_analyte ? sg.v_eq : V[i];
          ionic = ct * v_ions / (V0 + V[i]) + options.background_ionic_strength_mol_L;
          g /= std::pow(10.0,
                        davies_log_gamma(1, ionic, inputs.temperature_C));  // activity of H+ or OH- -> concentration
        }
        sum_ionic += ionic;
      }
      // Noise: dG = G ln10 du, so weight 1/(G ln10 sigma)^2 (constant relative noise).
      const double sgm = std::max(std::fabs(g) * kLn10 * sigma_u, 1e-300);
      s.v.push_back(x);
      s.g.push_back(g);
      s.w.push_back(1.0 / (sgm * sgm));
    }
    if (mean_ionic) *mean_ionic = sum_ionic / static_cast<double>(hi - lo + 1);
    return s;
  };

  auto index_range = [&](double from, double to, std::size_t& lo, std::size_t& hi) {
    lo = static_cast<std::size_t>(std::lower_bound(V.begin(), V.end(), from) - V.begin());
    const auto end = static_cast<std::size_t>(std::upper_bound(V.begin(), V.end(), to) - V.begin());
    if (end == 0 || lo >= end) return false;
    hi = end - 1;
    return static_cast<int>(hi - lo + 1) >= options.min_points;
  };

  // Fits one branch; nullopt when it has too few readings or no line.
  auto branch = [&](GranFunction f, bool after, const Segment& sg, double from, double to, int sign, bool fixed)
      -> std::optional<GranBranch> {
    std::size_t lo = 0, hi = 0;
    if (!index_range(from, to, lo, hi)) return std::nullopt;
    // Thin very long windows for the search, refit on all readings at the end.
    const Series full = series(f, sg, lo, hi, sign, nullptr);
    const std::size_t n = full.v.size();
    std::size_t stride = n > 400 ? n / 400 : 1;
    Series thin;
    if (stride > 1) {
      thin.u_ref = full.u_ref;
      for (std::size_t i = 0; i < n; i += stride)
        thin.v.push_back(full.v[i]), thin.g.push_back(full.g[i]), thin.w.push_back(full.w[i]);
    }
    const Series& search = stride > 1 ? thin : full;
    Trimmed t = trim(search, 0, search.v.size() - 1, options.min_points, fixed);
    if (!t.ok) return std::nullopt;
    std::size_t flo = t.lo, fhi = t.hi;
    Fit fit = t.fit;
    if (stride > 1) {
      flo = t.lo * stride;
      fhi = std::min(n - 1, t.hi * stride);
      fit = fit_line(full.v, full.g, full.w, flo, fhi);
    }
    if (!(std::fabs(fit.b) > 0)) return std::nullopt;
    GranBranch b;
    b.function = f;
    b.after = after;
    b.points = fit.n;
    b.window_from_mL = V[lo + flo];
    b.window_to_mL = V[lo + fhi];
    b.r2 = fit.r2;
    b.reduced_chi2 = fit.reduced();
    // A window that had to shrink to a small part of the candidates means the
    // function does not describe this branch (it was only straight by accident).
    const auto candidates = static_cast<int>(n);
    b.linear = t.linear && (fixed || fit.n >= std::max(options.min_points + 2, candidates / 5));
    b.slope = fit.b;
    b.intercept = fit.a;
    const double x0 = -fit.a / fit.b;
    // Standard error of the x-intercept from the full covariance, scaled by the residual variance.
    const double s2 = fit.reduced();
    const double var_x0 = s2 * (fit.var_a + x0 * x0 * fit.var_b + 2.0 * x0 * fit.cov_ab) / (fit.b * fit.b);
    b.volume_mL = x0;
    b.uncertainty_mL = std::sqrt(std::max(var_x0, 0.0));
    if (!std::isfinite(b.volume_mL) || !std::isfinite(b.uncertainty_mL)) return std::nullopt;
    // A line whose intercept is far from the derivative endpoint does not describe this branch.
    if (std::fabs(b.volume_mL - sg.v_eq) > options.max_offset * sg.seg) return std::nullopt;
    for (std::size_t i = flo; i <= fhi; ++i) b.line_points.emplace_back(full.v[i], full.g[i]);
    return b;
  };

  const std::size_t n_ep = endpoints.size();
  for (std::size_t k = 0; k < n_ep; ++k) {
    const double vk = endpoints[k].volume_mL;
    const double vp = k == 0 ? 0.0 : endpoints[k - 1].volume_mL;
    const double seg = vk - vp;
    if (!(seg > 0)) continue;
    const bool last = k + 1 == n_ep;
    // Manual window: the branch it falls in.
    const auto& win = options.window_mL;
    const bool win_before = win && win->first >= vp && win->second <= vk;
    const bool win_after = win && last && win->first >= vk;

    // Before the endpoint. For u rising: excess analyte and buffer use 10^(-u).
    const int before_sign = ud > 0 ? -1 : +1;
    if (!win || win_before) {
      const double from = win_before ? win->first : vp + options.before_from * seg;
      const double to = win_before ? win->second : vp + options.before_to * seg;
      const double buffer_to = win_before ? win->second : vp + options.buffer_to * seg;
      const Segment sg{static_cast<int>(k) + 1, vp, seg, vk};
      std::optional<GranBranch> strong, buffer;
      if (k == 0) strong = branch(GranFunction::excess_analyte, false, sg, from, to, before_sign, win_before);
      buffer = branch(GranFunction::buffer, false, sg, from, buffer_to, before_sign, win_before);
      auto better = [](const std::optional<GranBranch>& a, const std::optional<GranBranch>& b) {
        if (!a) return false;
        if (!b) return true;
        if (a->linear != b->linear) return a->linear;
        if (a->points != b->points) return a->points > b->points;
        return a->reduced_chi2 < b->reduced_chi2;
      };
      std::optional<GranBranch> chosen = better(strong, buffer) ? strong : buffer;
      if (chosen && chosen->function == GranFunction::buffer && !mv) {
        // pKa from the buffer slope: for u rising G = (V - V_prev) 10^(-pH) = Ka' (V_eq - V);
        // for u falling G = (V - V_prev) 10^(pH) = (V_eq - V) / Ka'. G was scaled by 10^(-/+ u_ref).
        std::size_t lo = 0, hi = 0;
        (void)index_range(chosen->window_from_mL, chosen->window_to_mL, lo, hi);
        double uref = 0;
        for (std::size_t i = lo; i <= hi; ++i) uref += U[i];
        uref /= static_cast<double>(hi - lo + 1);
        // Refit the chosen window with G scaled by its own mean level.
        double ionic = 0;
        const Series sr = series(GranFunction::buffer, sg, lo, hi, before_sign, &ionic);
        const Fit f = fit_line(sr.v, sr.g, sr.w, 0, sr.v.size() - 1);
        const double b = f.b;
        if (b < 0) {
          // With the activity correction the slope is the thermodynamic Ka; without it the
          // mixed constant (pH measures activity, the stoichiometry concentration).
          chosen->pKa = ud > 0 ? -std::log10(-b) + uref : std::log10(-b) + uref;
          const double se_b = std::sqrt(std::max(f.reduced() * f.var_b, 0.0));
          chosen->pKa_std_error = se_b / (std::fabs(b) * kLn10);
          chosen->pKa_activity_corrected = corrected;
          if (corrected) chosen->ionic_strength_mol_L = ionic;
        }
      }
      out[k].before = chosen;
    }
    // After the last endpoint: excess titrant, 10^(u - 14) for u rising.
    if (last && (!win || win_after)) {
      const double from = win_after ? win->first : vk + options.after_from * seg;
      const double to = win_after ? win->second : vk + options.after_to * seg;
      const Segment sg{static_cast<int>(k) + 1, 0.0, seg, vk};
      out[k].after = branch(GranFunction::excess_titrant, true, sg, from, to, -before_sign, win_after);
    }
    if (!out[k].before && !out[k].after) {
      warnings.push_back({"gran_failed",
                          fmt::format("Gran method: no straight branch found for endpoint {} ({:.3f} mL)", k + 1, vk),
                          {file, 0, 0}});
    }
  }
  if (options.window_mL) {
    const bool used = std::any_of(out.begin(), out.end(), [](const GranEndpoint& g) { return g.before || g.after; });
    if (!used) {
      warnings.push_back({"gran_window",
                          fmt::format("the Gran window {:g}:{:g} mL lies in no branch of this run (before an endpoint, "
                                      "or after the last one) or holds too few readings",
                                      options.window_mL->first,
                                      options.window_mL->second),
                          {file, 0, 0}});
    }
  }
  return out;
}

Consensus consensus(const Endpoint& e, const GranEndpoint& g, const std::optional<VolumeEstimate>& fitted) {
  struct Est {
    std::string name;
    double v, u;
    bool flagged;
  };
  std::vector<Est> all;
  const bool d_flagged = std::any_of(
      e.flags.begin(), e.flags.end(), [](const std::string& f) { return f == kFlagEdge || f == kFlagFewPoints; });
  all.push_back({"derivative", e.derivative_volume_mL, e.derivative_uncertainty_mL, d_flagged});
  if (g.before && g.before->linear)
    all.push_back({"gran_before", g.before->volume_mL, g.before->uncertainty_mL, false});
  if (g.after && g.after->linear) all.push_back({"gran_after", g.after->volume_mL, g.after->uncertainty_mL, false});
  if (fitted) all.push_back({"fit", fitted->volume_mL, fitted->uncertainty_mL, false});
  const bool any_clean = std::any_of(all.begin(), all.end(), [](const Est& x) { return !x.flagged; });
  auto apart = [](const Est& a, const Est& b) { return std::fabs(a.v - b.v) > 2.0 * std::sqrt(a.u * a.u + b.u * b.u); };
  // The reference the others must agree with: a usable fit (it models the whole curve,
  // asymmetry and activity included), else a clean derivative estimate (model-free).
  const Est* reference = nullptr;
  if (fitted)
    reference = &all.back();
  else if (!d_flagged)
    reference = &all.front();
  Consensus c;
  std::vector<Est> used;
  for (const auto& x : all) {
    if (any_clean && x.flagged) {
      c.left_out.push_back(x.name);
      continue;
    }
    // An estimate that disagrees with the reference rests on chemistry that does not hold
    // here (a Gran line under changing activity or a further weak step; an inflection that
    // is not the equivalence point of an asymmetric curve): leave it out.
    if (reference != nullptr && &x != reference && apart(x, *reference)) {
      c.left_out.push_back(x.name);
      // Against the derivative alone (no usable fit to say which chemistry holds) a disagreement is
      // itself worth a flag: look at the plots. Beside a usable fit it is expected (a Gran line
      // without activity correction) and the fit decides.
      if (!fitted) c.disagree = true;
      continue;
    }
    used.push_back(x);
  }
  double sw = 0, swv = 0;
  for (const auto& x : used) {
    const double u = std::max(x.u, 1e-6);
    sw += 1.0 / (u * u);
    swv += x.v / (u * u);
    c.methods.push_back(x.name);
  }
  c.volume_mL = swv / sw;
  double u = 1.0 / std::sqrt(sw);
  if (used.size() > 1) {
    // Birge ratio: inflate when the estimates scatter more than their uncertainties say.
    double chi2 = 0;
    for (const auto& x : used) {
      const double ux = std::max(x.u, 1e-6);
      chi2 += (x.v - c.volume_mL) * (x.v - c.volume_mL) / (ux * ux);
    }
    const double birge = std::sqrt(chi2 / static_cast<double>(used.size() - 1));
    if (birge > 1) u *= birge;
    // The estimates kept still scatter twice as much as their uncertainties allow.
    c.disagree = birge > 2.0;
  }
  // Without a reference (only flagged estimates), two that are far apart also flag it.
  if (reference == nullptr) {
    for (std::size_t i = 0; i < used.size(); ++i) {
      for (std::size_t j = i + 1; j < used.size(); ++j) c.disagree = c.disagree || apart(used[i], used[j]);
    }
  }
  c.uncertainty_mL = u;
  return c;
}

}  // namespace veq::signal
