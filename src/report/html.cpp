// SPDX-License-Identifier: MIT
// HTML report of one run: one function per section, each called only when its data exist.
#include "veq/report/html.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

#include "report/fit_sections.hpp"
#include "report/svg.hpp"
#include "report/utf8.hpp"
#include "veq/report/text.hpp"

namespace veq::report {

std::vector<std::string> HtmlOptions::validate() const {
  std::vector<std::string> p;
  if (plot_width_px < 200 || plot_width_px > 4000) {
    p.push_back(fmt::format("plot_width_px = {}: must be within 200-4000", plot_width_px));
  }
  if (plot_height_px < 100 || plot_height_px > 4000) {
    p.push_back(fmt::format("plot_height_px = {}: must be within 100-4000", plot_height_px));
  }
  return p;
}

std::string html_escape(std::string_view text) {
  const std::string valid = detail::valid_utf8(text);
  std::string out;
  out.reserve(valid.size() + 16);
  for (const char c : valid) {
    switch (c) {
      case '&':
        out += "&amp;";
        break;
      case '<':
        out += "&lt;";
        break;
      case '>':
        out += "&gt;";
        break;
      case '"':
        out += "&quot;";
        break;
      case '\'':
        out += "&#39;";
        break;
      default:
        out += c;
    }
  }
  return out;
}

namespace {

// Palette (ours): readings dark blue, endpoints brick red, derivatives green
// and purple, windows grey, the fitted model orange.
constexpr std::string_view kInk = "#1d4f7a";
constexpr std::string_view kEndpoint = "#b0392b";
constexpr std::string_view kFirst = "#2e7d32";
constexpr std::string_view kSecond = "#6a3d9a";
constexpr std::string_view kWindow = "#7f7f7f";
constexpr std::string_view kFit = "#d9822b";

std::string esc(std::string_view s) {
  return html_escape(s);
}

// Decimals that show a volume to the precision its uncertainty supports (2 significant digits of u).
int decimals_for(double uncertainty) {
  if (!(uncertainty > 0) || !std::isfinite(uncertainty)) return 3;
  const int d = 1 - static_cast<int>(std::floor(std::log10(uncertainty)));
  return std::clamp(d, 2, 6);
}

std::string signal_name(const Curve& c) {
  return c.signal == SignalKind::ph ? "pH" : "E (mV)";
}
int level_decimals(const Curve& c) {
  return c.signal == SignalKind::ph ? 2 : 1;
}

const char* flag_meaning(std::string_view flag) {
  if (flag == signal::kFlagEdge) {
    return "fewer than three readings beyond the endpoint, or the curve is still steep where the data stop: the "
           "titration may have been stopped too early or started too late";
  }
  if (flag == signal::kFlagFewPoints)
    return "the endpoint falls in a gap of the dosing (a step over 3 times the median)";
  if (flag == signal::kFlagNoisy) {
    return "the derivative peak is weak beside the reading noise, or the first- and second-derivative estimates differ "
           "by more than a dosing step";
  }
  if (flag == signal::kFlagMethodsDisagree) {
    return "the derivative and Gran estimates differ by more than twice their combined uncertainty: look at the plots "
           "before using the result";
  }
  if (flag == signal::kFlagGranNonlinear) return "no Gran window passed the straightness rule; the best one is shown";
  return "see the documentation";
}

std::string badge(std::string_view flag) {
  return fmt::format("<span class=\"flag\">{}</span>", esc(flag));
}

std::string fmt_volume(double v, int d) {
  return fmt::format("{:.{}f}", v, d);
}

// ---- sections --------------------------------------------------------------

std::string section_header(const Analysis& a, const HtmlOptions& o) {
  std::string s = "<header>\n";
  if (!o.index_href.empty())
    s += fmt::format("<p class=\"nav\"><a href=\"{}\">&#8592; all runs</a></p>\n", esc(o.index_href));
  s += fmt::format("<p class=\"kicker\">Titration report</p>\n<h1>{}</h1>\n", esc(a.run.facts.sample_id));
  s += fmt::format("<p class=\"source\">{} &#183; {} readings of {}</p>\n",
                   esc(a.run.source),
                   a.run.volume_mL.size(),
                   esc(to_string(a.run.signal)));
  s += "</header>\n";
  s += fmt::format(
      "<aside class=\"caution\" role=\"note\"><strong>Safety.</strong> {} Follow your lab's own "
      "procedures; they take precedence over anything shown here.</aside>\n",
      esc(safety_caution()));
  return s;
}

std::string section_results(const Analysis& a) {
  const auto& eps = a.endpoints.endpoints;
  const Curve& c = a.curve;
  std::string s = "<section id=\"results\">\n<h2>Results</h2>\n";
  if (eps.empty()) {
    std::string why = "no derivative peak passed the acceptance rule";
    for (const auto& w : a.endpoints.warnings) {
      if (w.code == "no_endpoint" || w.code == "too_few_readings") why = w.message;
    }
    s += fmt::format("<p class=\"none\">No endpoint found: {}.</p>\n</section>\n", esc(why));
    return s;
  }
  s += "<table class=\"results\">\n<thead><tr><th>Endpoint</th><th>Volume [mL]</th><th>u [mL]</th>"
       "<th>" +
       esc(signal_name(c)) +
       " at endpoint</th><th>Estimates combined</th><th>1st derivative [mL]</th>"
       "<th>2nd derivative [mL]</th><th>Gran before [mL]</th><th>Gran after "
       "[mL]</th><th>Flags</th></tr></thead>\n<tbody>\n";
  for (std::size_t i = 0; i < eps.size(); ++i) {
    const auto& e = eps[i];
    const int d = decimals_for(e.uncertainty_mL);
    auto opt = [&](const std::optional<double>& v) { return v ? fmt_volume(*v, d) : std::string("&#8212;"); };
    auto gran = [&](bool after) -> std::string {
      if (i >= a.gran.size()) return "&#8212;";
      const auto& b = after ? a.gran[i].after : a.gran[i].before;
      if (!b) return "&#8212;";
      const std::string name = after ? "gran_after" : "gran_before";
      const bool left_out =
          std::find(e.consensus_left_out.begin(), e.consensus_left_out.end(), name) != e.consensus_left_out.end();
      return fmt::format("{} &#177; {}{}{}",
                         fmt_volume(b->volume_mL, d),
                         fmt_volume(b->uncertainty_mL, d),
                         b->linear ? "" : " (not straight)",
                         left_out ? " (left out)" : "");
    };
    std::string methods;
    for (const auto& m : e.consensus_methods) methods += (methods.empty() ? "" : ", ") + esc(m);
    std::string flags;
    for (const auto& f : e.flags) flags += badge(f) + " ";
    s += fmt::format(
        "<tr><td>{}</td><td class=\"num\"><strong>{}</strong></td><td class=\"num\">{}</td><td "
        "class=\"num\">{:.{}f}</td>"
        "<td>{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td class=\"num\">{}</td><td "
        "class=\"num\">{}</td>"
        "<td>{}</td></tr>\n",
        e.index,
        fmt_volume(e.volume_mL, d),
        fmt_volume(e.uncertainty_mL, d),
        e.value,
        level_decimals(c),
        methods,
        opt(e.first_derivative_mL),
        opt(e.second_derivative_mL),
        gran(false),
        gran(true),
        flags.empty() ? "none" : flags);
  }
  s += "</tbody>\n</table>\n";
  s += "<p class=\"note\">u is the standard uncertainty (coverage factor k = 1); the volume is the consensus of the "
       "estimates listed. An estimate marked (left out) disagreed with the reference (the fit, or the "
       "derivative): its u is statistical, and activity or chemistry its line does not allow for moves it. " +
       esc(signal_name(c)) + " at the endpoint: " +
       (eps.front().value_method == "local_model" ? std::string("from the local model of the jump.")
                                                  : std::string("interpolated between readings.")) +
       "</p>\n";
  // pKa values from buffer lines.
  std::string pka;
  for (std::size_t i = 0; i < a.gran.size() && i < eps.size(); ++i) {
    for (const auto* b :
         {a.gran[i].before ? &*a.gran[i].before : nullptr, a.gran[i].after ? &*a.gran[i].after : nullptr}) {
      if (b == nullptr || !b->pKa) continue;
      // Shown to the precision its standard error supports (two significant digits of it).
      const int d = b->pKa_std_error ? decimals_for(*b->pKa_std_error) : 2;
      pka += fmt::format("<li>before endpoint {}: pKa {:.{}f}{}{}</li>\n",
                         eps[i].index,
                         *b->pKa,
                         d,
                         b->pKa_std_error ? fmt::format(" &#177; {:.{}f}", *b->pKa_std_error, d) : std::string(),
                         b->pKa_activity_corrected ? " (corrected for activity)" : " (not corrected for activity)");
    }
  }
  if (!pka.empty()) s += "<p>From the buffer region (Gran):</p>\n<ul>\n" + pka + "</ul>\n";
  s += "</section>\n";
  return s;
}

// What the lab reports: each result of the method with its expanded uncertainty, verdict and budget.
std::string section_method_results(const Analysis& a) {
  if (!a.results && a.results_error.empty()) return {};
  std::string s = "<section id=\"method-results\">\n<h2>Reported results</h2>\n";
  if (!a.results) {
    return s + "<p class=\"none\">No result: " + esc(a.results_error) + "</p>\n</section>\n";
  }
  const auto& rs = *a.results;
  s += "<p>Method: <strong>" + esc(rs.method_name) + "</strong> (" + esc(rs.method_path) + ")</p>\n";
  s += "<table class=\"results\">\n<thead><tr><th>Result</th><th>Value</th><th>U (k = 2)</th><th>Unit</th>"
       "<th>Specification</th><th>Verdict</th><th>From</th></tr></thead>\n<tbody>\n";
  for (const auto& r : rs.results) {
    const std::string spec = esc(spec_text(r.spec_low, r.spec_high, std::max(r.decimals, 1)));
    const std::string from =
        r.at_pH
            ? fmt::format("volume at pH {:g}: {:.3f} mL", *r.at_pH, r.endpoint_volume_mL)
            : fmt::format("endpoint {} ({}): {:.4f} mL", r.endpoint_index, esc(r.volume_source), r.endpoint_volume_mL);
    s += fmt::format(
        "<tr><td>{}</td><td class=\"num\"><strong>{:.{}f}</strong></td><td class=\"num\">{:.{}f}</td>"
        "<td>{}</td><td>{}</td><td class=\"verdict-{}\">{}</td><td>{}</td></tr>\n",
        esc(r.name),
        r.value,
        r.decimals,
        r.expanded_uncertainty,
        r.decimals,
        esc(method::to_string(r.unit)),
        spec.empty() ? std::string("&#8212;") : spec,
        esc(r.verdict.empty() ? "none" : r.verdict),
        esc(r.verdict.empty() ? "no limits" : r.verdict),
        from);
  }
  s += "</tbody>\n</table>\n";
  for (const auto& r : rs.results) {
    s += "<h3>Uncertainty budget: " + esc(r.name) + "</h3>\n<p class=\"note\">" + esc(r.formula) +
         " (first-order propagation, GUM; tolerances as rectangular distributions)</p>\n";
    s += "<table class=\"budget\">\n<thead><tr><th>Input</th><th>Value</th><th>Standard uncertainty</th>"
         "<th>Contribution</th><th>Share of u&#178;</th></tr></thead>\n<tbody>\n";
    for (const auto& b : r.budget) {
      s += fmt::format(
          "<tr><td>{}</td><td class=\"num\">{:.6g} {}</td><td class=\"num\">{:.3g}</td>"
          "<td class=\"num\">{:.3g}</td><td class=\"num\">{:.1f} %</td></tr>\n",
          esc(b.name),
          b.value,
          esc(b.unit),
          b.std_uncertainty,
          b.contribution,
          b.percent);
    }
    s += fmt::format(
        "<tr><td><strong>combined</strong></td><td></td><td></td><td class=\"num\"><strong>{:.3g}</strong>"
        "</td><td class=\"num\">100 %</td></tr>\n</tbody>\n</table>\n",
        r.uncertainty);
    for (const auto& n : r.notes) s += "<p class=\"note\">Note: " + esc(n) + "</p>\n";
  }
  for (const auto& c : rs.conflicts) s += "<p class=\"warn\">Check: " + esc(c) + "</p>\n";
  for (const auto& f : rs.acceptance_failures) s += "<p class=\"warn\">Acceptance failed: " + esc(f) + "</p>\n";
  if (rs.titer) {
    const auto& t = *rs.titer;
    s += fmt::format("<p>Titrant {}: <strong>{:.6g} mol/L</strong>, standard uncertainty {:.2g} mol/L{}.</p>\n",
                     esc(t.titrant),
                     t.concentration_mol_L,
                     t.uncertainty_mol_L,
                     t.nominal_mol_L > 0 ? fmt::format(" (titer {:.4f} of the nominal {:g})",
                                                       t.concentration_mol_L / t.nominal_mol_L,
                                                       t.nominal_mol_L)
                                         : std::string());
  }
  return s + "</section>\n";
}

// The colour indicators that change colour at each endpoint, with their error.
std::string section_indicators(const Analysis& a) {
  bool any = false;
  for (const auto& e : a.indicators.endpoints) any = any || !e.candidates.empty();
  if (!any) return {};
  std::string s = "<section id=\"indicators\">\n<h2>Colour indicators</h2>\n";
  s += "<p class=\"note\">For a manual titration of the same sample: where each indicator's colour change is "
       "first seen, its indicator error against the endpoint, and how many drops the whole change spans (judged "
       "on the " +
       esc(a.indicators.curve_method) + " curve).</p>\n";
  auto swatch = [](const indicators::Colour& c) {
    return fmt::format("<span class=\"swatch\" style=\"background:{}\"></span>{}", esc(c.srgb_hex), esc(c.name));
  };
  // The colours in the order the titration shows them: acid to base colour as the pH rises (a base
  // titrant), base to acid colour as it falls (an acid titrant).
  const bool pH_rises = a.curve.signal == SignalKind::ph ? a.curve.direction >= 0 : a.curve.direction < 0;
  for (const auto& e : a.indicators.endpoints) {
    if (e.candidates.empty()) continue;
    s += fmt::format("<h3>Endpoint {} at {:.3f} mL{}</h3>\n",
                     e.endpoint_index,
                     e.equivalence_mL,
                     e.endpoint_pH ? fmt::format(", pH {:.2f}", *e.endpoint_pH) : std::string());
    s += "<table class=\"indicators\">\n<thead><tr><th>Indicator</th><th>Range (pH)</th><th>Colours</th>"
         "<th>Seen at</th><th>Error</th><th>Change spans</th><th>Verdict</th><th>Note</th></tr></thead>\n<tbody>\n";
    for (const auto& c : e.candidates) {
      const auto& ind = c.indicator;
      s += fmt::format(
          "<tr><td>{}</td><td class=\"num\">{:.1f}&#8211;{:.1f}</td><td>{} &#8594; {}</td><td class=\"num\">{}</td>"
          "<td class=\"num\">{}</td><td class=\"num\">{}</td><td>{}</td><td>{}</td></tr>\n",
          esc(ind.name),
          ind.low_pH,
          ind.high_pH,
          swatch(pH_rises ? ind.acid_colour : ind.base_colour),
          swatch(pH_rises ? ind.base_colour : ind.acid_colour),
          c.seen_mL ? fmt::format("{:.3f} mL (pH {:.1f})", *c.seen_mL, c.transition.seen_pH) : std::string("&#8212;"),
          c.error_percent ? fmt::format("{:+.2f} %", *c.error_percent) : std::string("&#8212;"),
          c.span_mL ? fmt::format("{:.3f} mL ({:.1f} drops)", *c.span_mL, c.span_drops.value_or(0.0))
                    : std::string("&#8212;"),
          esc(indicators::to_string(c.verdict)),
          esc(c.note));
    }
    s += "</tbody>\n</table>\n";
    if (!e.also_suitable.empty()) {
      std::string names;
      for (const auto& n : e.also_suitable) names += (names.empty() ? "" : ", ") + esc(n);
      s += "<p>Also suitable: " + names + ".</p>\n";
    }
  }
  return s + "</section>\n";
}

svg::Points curve_points(const Curve& c, bool spikes) {
  svg::Points p;
  for (std::size_t i = 0; i < c.volume_mL.size(); ++i) {
    const bool spike = i < c.spike.size() && c.spike[i] != 0;
    if (spike == spikes) p.emplace_back(c.volume_mL[i], c.value[i]);
  }
  return p;
}

std::pair<double, double> range_of(const svg::Points& p, bool y) {
  double lo = INFINITY, hi = -INFINITY;
  for (const auto& [a, b] : p) {
    const double v = y ? b : a;
    if (std::isfinite(v)) lo = std::min(lo, v), hi = std::max(hi, v);
  }
  if (!(lo <= hi)) return {0.0, 1.0};
  return {lo, hi};
}

std::string figure(const std::string& svg_text, const std::string& caption) {
  return "<figure>\n" + svg_text + "<figcaption>" + caption + "</figcaption>\n</figure>\n";
}

// Endpoint markers shared by the curve and derivative plots: the uncertainty
// band (V - u, V + u) and a dashed line at V.
void mark_endpoints(svg::Plot& plot, const Analysis& a, double label_y) {
  for (const auto& e : a.endpoints.endpoints) {
    plot.x_band(e.volume_mL - e.uncertainty_mL, e.volume_mL + e.uncertainty_mL, svg::fill(kEndpoint, 0.18));
    plot.vline(e.volume_mL, svg::stroke(kEndpoint, 1.2, "5 3"));
    plot.text(e.volume_mL, label_y, fmt::format("EP{}", e.index));
  }
}

// The fitted model's signal at the readings it was fitted to, when a fit produced one.
svg::Points model_points(const Analysis& a) {
  svg::Points p;
  if (!a.fit.best || a.fit.best->status == fit::FitStatus::failed || a.fit.best->status == fit::FitStatus::not_run)
    return p;
  const fit::FitSummary& b = *a.fit.best;
  const std::size_t n = std::min(b.residual_volumes_mL.size(), b.model_values.size());
  for (std::size_t i = 0; i < n; ++i) {
    if (std::isfinite(b.residual_volumes_mL[i]) && std::isfinite(b.model_values[i]))
      p.emplace_back(b.residual_volumes_mL[i], b.model_values[i]);
  }
  return p;
}

std::string section_curve(const Analysis& a, const HtmlOptions& o) {
  const Curve& c = a.curve;
  const svg::Points pts = curve_points(c, false);
  const svg::Points spikes = curve_points(c, true);
  svg::Points all = pts;
  all.insert(all.end(), spikes.begin(), spikes.end());
  const auto [x0, x1] = range_of(all, false);
  const auto [y0, y1] = range_of(all, true);
  svg::Plot plot("curve", "Titration curve of " + a.run.facts.sample_id, o.plot_width_px, o.plot_height_px);
  plot.x_axis(x0, x1, "Titrant added [mL]");
  plot.y_axis(y0, y1, c.signal == SignalKind::ph ? (c.converted_from_mv ? "pH (from mV)" : "pH") : "E [mV]");
  // The transition band of each suitable (or correctable) indicator, in its base-side colour.
  std::vector<std::string> banded;
  for (const auto& ep : a.indicators.endpoints) {
    for (const auto& cc : ep.candidates) {
      if (cc.verdict == indicators::Verdict::unsuitable) continue;
      if (std::find(banded.begin(), banded.end(), cc.indicator.name) != banded.end()) continue;
      banded.push_back(cc.indicator.name);
      const auto& col =
          cc.indicator.base_colour.name == "colourless" ? cc.indicator.acid_colour : cc.indicator.base_colour;
      plot.y_band(cc.indicator.low_pH, cc.indicator.high_pH, svg::fill(col.srgb_hex, 0.16));
      plot.legend(
          cc.indicator.name + " (" + fmt::format("{:.1f}-{:.1f}", cc.indicator.low_pH, cc.indicator.high_pH) + ")",
          svg::fill(col.srgb_hex, 0.5));
      if (banded.size() >= 2) break;
    }
  }
  mark_endpoints(plot, a, y1);
  plot.polyline(pts, svg::stroke(kInk, 1.2, {}, 0.6));
  plot.dots(pts, 1.8, svg::fill(kInk));
  if (!spikes.empty()) plot.dots(spikes, 3.0, svg::stroke(kEndpoint, 1.2));
  const svg::Points model = model_points(a);
  if (model.size() >= 2) plot.polyline(model, svg::stroke(kFit, 1.8));
  plot.legend("readings", svg::fill(kInk));
  if (model.size() >= 2) plot.legend("fitted model", svg::stroke(kFit));
  if (!spikes.empty()) plot.legend("spikes (not used)", svg::stroke(kEndpoint));
  if (!a.endpoints.endpoints.empty()) plot.legend("endpoint \xC2\xB1 u", svg::fill(kEndpoint, 0.5));
  std::string cap = fmt::format("Titration curve: {} readings", c.volume_mL.size());
  if (!spikes.empty())
    cap += fmt::format(", {} isolated spike(s) circled and left out of endpoint detection", spikes.size());
  cap += ". Shaded: each endpoint &#177; its standard uncertainty";
  if (!banded.empty()) cap += "; horizontal bands: the transition ranges of suitable colour indicators";
  if (model.size() >= 2) cap += "; orange line: the fitted charge-balance model";
  cap += ".";
  return "<section id=\"curve\">\n<h2>Titration curve</h2>\n" + figure(plot.finish(), cap) + "</section>\n";
}

const char* fit_flag_meaning(std::string_view flag) {
  if (flag == fit::kFlagNotConverged) return "the solver stopped before it converged; the values are its last iterate";
  if (flag == fit::kFlagAtBound) return "a fitted parameter ended on the edge of its allowed range";
  if (flag == fit::kFlagCovarianceFailed)
    return "the parameters could not all be told apart from these readings: no uncertainties";
  if (flag == fit::kFlagResidualPattern)
    return "the residuals run in long same-sign stretches: the model misses a shape of the curve";
  if (flag == fit::kFlagPoorFit) return "the residuals are well above the reading noise";
  if (flag == fit::kFlagAmbiguous) return "the runner-up model scores almost as well: the chemistry is not settled";
  if (flag == fit::kFlagSkipped) return "not run: the sample volume or titrant concentration is missing";
  if (flag == fit::kFlagFailed) return "no candidate model could be fitted";
  return "see the documentation";
}

// The charge-balance fit: what was fitted, the parameters with their
// intervals, the fitted equivalence volumes and the residual plot.
std::string section_fit(const Analysis& a, const HtmlOptions& o) {
  const fit::FitResult& r = a.fit;
  std::string s = "<section id=\"fit\">\n<h2>Fitted model (charge balance)</h2>\n";
  if (!r.best) {
    std::string why = r.message.empty() ? std::string("not run") : r.message;
    return s + "<p class=\"none\">No fit: " + esc(why) + ".</p>\n</section>\n";
  }
  const fit::FitSummary& b = *r.best;
  const char* unit = b.signal == SignalKind::ph ? "pH" : "mV";
  s += fmt::format(
      "<p>Model <strong>{}</strong>, {} readings, {} free parameters, residual SD {:.2g} {}, {} iterations, {}",
      esc(b.model),
      b.points,
      b.free_parameters,
      b.residual_sd,
      unit,
      b.iterations,
      esc(fit::to_string(b.status)));
  if (r.runner_up) {
    s += fmt::format("; runner-up {} ({} {:+.1f}{})",
                     esc(r.runner_up->model),
                     esc(fit::to_string(r.criterion)),
                     r.runner_up->score - b.score,
                     esc(detail::set_aside_text(r.runner_up->set_aside)));
  }
  s += r.usable() ? ". Used beside the endpoints.</p>\n"
                  : ". <strong>Not used</strong> beside the endpoints (see the flags).</p>\n";
  s += "<table class=\"results\">\n<thead><tr><th>Parameter</th><th>Value</th><th>Standard error</th>"
       "<th>95 % interval</th><th>Unit</th></tr></thead>\n<tbody>\n";
  for (const auto& p : b.parameters) {
    const int d = detail::parameter_decimals(p.std_error, p.value);
    std::string se = p.fixed ? "held" : (p.std_error ? fmt::format("{:.{}f}", *p.std_error, d) : "&#8211;");
    std::string ci =
        (p.ci95_low && p.ci95_high) ? fmt::format("{:.{}f} to {:.{}f}", *p.ci95_low, d, *p.ci95_high, d) : "&#8211;";
    s += fmt::format("<tr><td>{}</td><td>{:.{}f}</td><td>{}</td><td>{}</td><td>{}</td></tr>\n",
                     esc(p.name),
                     p.value,
                     d,
                     se,
                     ci,
                     esc(p.unit));
  }
  for (const auto& fe : b.equivalence) {
    const int d = fe.uncertainty_mL ? decimals_for(*fe.uncertainty_mL) : 3;
    s += fmt::format("<tr><td>equivalence volume{}</td><td>{:.{}f}</td><td>{}</td><td>&#8211;</td><td>mL</td></tr>\n",
                     fe.endpoint_index > 0 ? fmt::format(" (EP{})", fe.endpoint_index)
                                           : std::string(fe.in_range ? "" : " (beyond the readings)"),
                     fe.volume_mL,
                     d,
                     fe.uncertainty_mL ? fmt::format("{:.{}f}", *fe.uncertainty_mL, d) : "&#8211;");
  }
  s += "</tbody>\n</table>\n";
  std::vector<std::string> flags = b.flags;
  for (const auto& f : r.flags) flags.push_back(f);
  if (!flags.empty()) {
    s += "<dl>\n";
    for (const auto& f : flags) s += fmt::format("<dt>{}</dt><dd>{}</dd>\n", badge(f), esc(fit_flag_meaning(f)));
    s += "</dl>\n";
  }
  const std::size_t n = std::min(b.residuals.size(), b.residual_volumes_mL.size());
  if (n >= 2 && b.status != fit::FitStatus::failed) {
    svg::Points p;
    for (std::size_t i = 0; i < n; ++i) {
      if (std::isfinite(b.residual_volumes_mL[i]) && std::isfinite(b.residuals[i]))
        p.emplace_back(b.residual_volumes_mL[i], b.residuals[i]);
    }
    const auto [x0, x1] = range_of(p, false);
    auto [y0, y1] = range_of(p, true);
    const double m = std::max({std::fabs(y0), std::fabs(y1), 2.0 * b.residual_sd, 1e-6});
    svg::Plot plot("residuals", "Residuals of the fit", o.plot_width_px, 0.45 * o.plot_height_px);
    plot.x_axis(x0, x1, "Titrant added [mL]");
    plot.y_axis(-m, m, std::string("measured - model [") + unit + "]");
    mark_endpoints(plot, a, m);
    if (b.residual_sd > 0.0) plot.y_band(-2.0 * b.residual_sd, 2.0 * b.residual_sd, svg::fill(kWindow, 0.12));
    plot.hline(0.0, svg::stroke("#999", 1));
    plot.dots(p, 1.8, svg::fill(kFit));
    plot.legend("residual", svg::fill(kFit));
    plot.legend("\xC2\xB1 2 residual SD", svg::fill(kWindow, 0.4));
    s += figure(plot.finish(),
                fmt::format("Residuals (measured minus fitted model) in volume order; runs test z = {:.2f}, "
                            "Durbin&#8211;Watson {:.2f}. A model that describes the data leaves a patternless band.",
                            b.residual_tests.runs_z,
                            b.residual_tests.durbin_watson));
  }
  return s + "</section>\n";
}

std::string section_derivatives(const Analysis& a, const HtmlOptions& o) {
  const signal::Derivatives& d = a.endpoints.derivatives;
  const double h = 0.6 * o.plot_height_px;
  const std::string unit = a.curve.signal == SignalKind::ph ? "pH" : "mV";
  std::string s = "<section id=\"derivatives\">\n<h2>Derivatives</h2>\n";
  if (!d.d1.empty()) {
    svg::Points p;
    for (std::size_t i = 0; i < d.d1.size() && i < d.mid_mL.size(); ++i) p.emplace_back(d.mid_mL[i], d.d1[i]);
    const auto [x0, x1] = range_of(p, false);
    auto [y0, y1] = range_of(p, true);
    y0 = std::min(y0, 0.0), y1 = std::max(y1, 0.0);
    svg::Plot plot("d1", "First derivative", o.plot_width_px, h);
    plot.x_axis(x0, x1, "Titrant added [mL]");
    plot.y_axis(y0, y1, "d" + unit + "/dV [" + unit + "/mL]");
    mark_endpoints(plot, a, y1);
    plot.hline(0.0, svg::stroke("#999", 1));
    plot.polyline(p, svg::stroke(kFirst, 1.6));
    s += figure(plot.finish(),
                fmt::format("First derivative (local regression over {} readings), at the midpoints "
                            "between readings; its maximum marks an endpoint.",
                            d.window_points));
  }
  if (!d.d2.empty()) {
    svg::Points p;
    for (std::size_t i = 0; i < d.d2.size() && i < d.at_mL.size(); ++i) p.emplace_back(d.at_mL[i], d.d2[i]);
    const auto [x0, x1] = range_of(p, false);
    auto [y0, y1] = range_of(p, true);
    y0 = std::min(y0, 0.0), y1 = std::max(y1, 0.0);
    svg::Plot plot("d2", "Second derivative", o.plot_width_px, h);
    plot.x_axis(x0, x1, "Titrant added [mL]");
    plot.y_axis(y0, y1, "d\xC2\xB2" + unit + "/dV\xC2\xB2 [" + unit + "/mL\xC2\xB2]");
    mark_endpoints(plot, a, y1);
    plot.hline(0.0, svg::stroke("#999", 1));
    plot.polyline(p, svg::stroke(kSecond, 1.6));
    s += figure(plot.finish(), "Second derivative at the readings; it crosses zero at an endpoint.");
  }
  s += "</section>\n";
  return s;
}

std::string gran_function_text(const signal::GranBranch& b) {
  switch (b.function) {
    case signal::GranFunction::excess_analyte:
      return "excess analyte, before the endpoint";
    case signal::GranFunction::excess_titrant:
      return "excess titrant, after the endpoint";
    case signal::GranFunction::buffer:
      return "buffer region, before the endpoint";
  }
  return "";
}

std::string gran_plot(const signal::GranBranch& b, int endpoint, const std::string& id, const HtmlOptions& o) {
  svg::Points p(b.line_points.begin(), b.line_points.end());
  auto [px0, px1] = range_of(p, false);
  auto [y0, y1] = range_of(p, true);
  // A buffer line may be fitted against the effective volume (titrant that
  // converted the analyte); the window then lies where its readings are plotted.
  const bool effective =
      !p.empty() && (std::fabs(px0 - b.window_from_mL) > 1e-9 || std::fabs(px1 - b.window_to_mL) > 1e-9);
  double x0 = std::min(px0, b.volume_mL), x1 = std::max(px1, b.volume_mL);
  const double pad = 0.04 * (x1 - x0);
  x0 -= pad, x1 += pad;
  y0 = std::min(y0, 0.0), y1 = std::max(y1, 0.0);
  svg::Plot plot(id, fmt::format("Gran plot, endpoint {}", endpoint), o.plot_width_px, 0.6 * o.plot_height_px);
  plot.x_axis(x0, x1, effective ? "Effective titrant volume V\xE2\x80\xB2 [mL]" : "Titrant added [mL]");
  plot.y_axis(y0, y1, "Gran function (scaled)");
  plot.x_band(px0, px1, svg::fill(kWindow, 0.15));
  plot.hline(0.0, svg::stroke("#999", 1));
  // The regression line from the far end of the window to its x-intercept.
  const double far = std::fabs(px0 - b.volume_mL) > std::fabs(px1 - b.volume_mL) ? px0 : px1;
  plot.segment(
      far, b.intercept + b.slope * far, b.volume_mL, b.intercept + b.slope * b.volume_mL, svg::stroke(kEndpoint, 1.6));
  plot.dots(p, 2.2, svg::fill(kInk));
  plot.x_band(b.volume_mL - b.uncertainty_mL, b.volume_mL + b.uncertainty_mL, svg::fill(kEndpoint, 0.25));
  plot.text(b.volume_mL, y1, fmt::format("{:.{}f} mL", b.volume_mL, decimals_for(b.uncertainty_mL)));
  plot.legend("readings used", svg::fill(kInk));
  plot.legend("regression line", svg::stroke(kEndpoint));
  plot.legend("window", svg::fill(kWindow, 0.5));
  const int d = decimals_for(b.uncertainty_mL);
  std::string cap = fmt::format(
      "Gran plot for endpoint {} ({}): {} readings from {:.2f} to {:.2f} mL, R&#178; {:.5f}; the line meets zero at "
      "{} &#177; {} mL.",
      endpoint,
      gran_function_text(b),
      b.points,
      b.window_from_mL,
      b.window_to_mL,
      b.r2,
      fmt_volume(b.volume_mL, d),
      fmt_volume(b.uncertainty_mL, d));
  if (effective) {
    cap +=
        " Volumes are effective volumes: the titrant added, corrected for the free H&#8314; and OH&#8315; in "
        "solution.";
  }
  if (!b.linear) cap += " No window passed the straightness rule; this is the best one.";
  if (b.pKa) cap += fmt::format(" Slope gives pKa {:.2f}.", *b.pKa);
  return figure(plot.finish(), cap);
}

std::string section_gran(const Analysis& a, const HtmlOptions& o) {
  std::string figs;
  for (std::size_t i = 0; i < a.gran.size() && i < a.endpoints.endpoints.size(); ++i) {
    const int ep = a.endpoints.endpoints[i].index;
    if (a.gran[i].before) figs += gran_plot(*a.gran[i].before, ep, fmt::format("gran{}b", ep), o);
    if (a.gran[i].after) figs += gran_plot(*a.gran[i].after, ep, fmt::format("gran{}a", ep), o);
  }
  if (figs.empty()) return {};
  return "<section id=\"gran\">\n<h2>Gran plots</h2>\n" + figs + "</section>\n";
}

std::string section_flags(const Analysis& a) {
  std::vector<std::string> seen;
  for (const auto& e : a.endpoints.endpoints) {
    for (const auto& f : e.flags) {
      if (std::find(seen.begin(), seen.end(), f) == seen.end()) seen.push_back(f);
    }
  }
  if (seen.empty()) return {};
  std::string s = "<section id=\"flags\">\n<h2>Quality flags</h2>\n<dl>\n";
  for (const auto& f : seen) s += fmt::format("<dt>{}</dt><dd>{}</dd>\n", badge(f), esc(flag_meaning(f)));
  s += "</dl>\n</section>\n";
  return s;
}

std::string section_warnings(const Analysis& a) {
  if (a.warnings.empty()) return {};
  std::string s = "<section id=\"warnings\">\n<h2>Warnings</h2>\n<ul class=\"warnings\">\n";
  for (const auto& w : a.warnings) {
    s += fmt::format("<li><code>{}</code> {}{}</li>\n",
                     esc(w.code),
                     w.where.line > 0 ? fmt::format("line {}: ", w.where.line) : "",
                     esc(w.message));
  }
  s += "</ul>\n</section>\n";
  return s;
}

std::string row(std::string_view key, std::string_view value_html) {
  return fmt::format("<tr><th>{}</th><td>{}</td></tr>\n", esc(key), value_html);
}

std::string section_details(const Analysis& a) {
  const Run& r = a.run;
  const Curve& c = a.curve;
  std::string s = "<section id=\"details\">\n<h2>Run details</h2>\n<div class=\"cols\">\n";
  s += "<table class=\"kv\">\n<caption>Facts used</caption>\n";
  s += row("Sample", esc(r.facts.sample_id));
  if (r.facts.sample_volume_mL) s += row("Sample volume", fmt::format("{:g} mL", *r.facts.sample_volume_mL));
  if (r.facts.sample_mass_g) s += row("Sample mass", fmt::format("{:g} g", *r.facts.sample_mass_g));
  if (!r.facts.titrant_name.empty()) s += row("Titrant", esc(r.facts.titrant_name));
  s += row("Titrant kind", esc(to_string(r.facts.titrant_kind)));
  if (r.facts.titrant_conc_mol_L)
    s += row("Titrant concentration", fmt::format("{:g} mol/L", *r.facts.titrant_conc_mol_L));
  s += row("Temperature", fmt::format("{:.1f} &#176;C{}", c.temperature_C, c.temperature_known ? "" : " (assumed)"));
  if (r.facts.electrode) {
    s += row("Electrode",
             fmt::format("E0 {:.1f} mV, slope {:.2f} mV/pH ({})",
                         r.facts.electrode->e0_mV,
                         r.facts.electrode->slope_mV_per_pH,
                         esc(r.facts.electrode->source)));
  }
  s += row("Reading noise", fmt::format("{:.2g} {}", c.noise_sd, c.signal == SignalKind::ph ? "pH" : "mV"));
  s += row("Derivative window", fmt::format("{} readings", a.endpoints.derivatives.window_points));
  s += "</table>\n";
  if (!r.metadata.empty()) {
    s += "<table class=\"kv\">\n<caption>Metadata (as written in the file)</caption>\n";
    for (const auto& [k, v] : r.metadata) s += row(k, esc(v));
    s += "</table>\n";
  }
  const Dialect& d = r.dialect;
  std::string sep;
  switch (d.separator) {
    case ',':
      sep = "comma";
      break;
    case ';':
      sep = "semicolon";
      break;
    case '\t':
      sep = "tab";
      break;
    case '|':
      sep = "vertical bar";
      break;
    default:
      sep = "spaces";
  }
  s += "<table class=\"kv\">\n<caption>How the file was read</caption>\n";
  s += row("Encoding", esc(d.encoding));
  s += row("Line endings", esc(d.line_ending));
  s += row("Separator", esc(sep));
  s += row("Decimal mark", d.decimal == ',' ? "comma" : "point");
  s += row("Header line", d.header_line > 0 ? std::to_string(d.header_line) : std::string("none"));
  s += row("First reading on line", std::to_string(d.first_data_line));
  auto col = [&](const char* what, const Column& c) {
    s += row(what,
             fmt::format("column {}{} [{}]",
                         c.index + 1,
                         c.header.empty() ? "" : " &#8216;" + esc(c.header) + "&#8217;",
                         esc(c.unit)));
  };
  col("Volume", r.volume_column);
  col("Signal", r.signal_column);
  if (r.temperature_column) col("Temperature", *r.temperature_column);
  if (r.time_column) col("Time", *r.time_column);
  s += "</table>\n</div>\n";
  if (!r.notes.empty()) {
    s += "<h3>Notes kept from the file</h3>\n<ul class=\"notes\">\n";
    for (const auto& n : r.notes) s += "<li>" + esc(n) + "</li>\n";
    s += "</ul>\n";
  }
  s += "</section>\n";
  return s;
}

constexpr std::string_view kCss = R"css(
:root { --ink: #1b1f24; --muted: #5b6470; --line: #d5dae0; --accent: #1d4f7a; --warn: #8a5300; }
* { box-sizing: border-box; }
body { font-family: system-ui, -apple-system, "Segoe UI", Roboto, "Helvetica Neue", Arial, sans-serif; color: var(--ink);
  max-width: 60rem; margin: 1.5rem auto; padding: 0 1rem; line-height: 1.45; }
h1 { font-size: 1.6rem; margin: 0.1rem 0 0.2rem; }
h2 { font-size: 1.15rem; border-bottom: 2px solid var(--accent); padding-bottom: 0.15rem; margin-top: 1.8rem; }
h3 { font-size: 1rem; }
.kicker { text-transform: uppercase; letter-spacing: 0.08em; font-size: 0.75rem; color: var(--muted); margin: 0; }
.source, .note, figcaption { color: var(--muted); font-size: 0.9rem; }
.nav { margin: 0 0 0.6rem; font-size: 0.9rem; }
.caution { border-left: 5px solid var(--warn); background: #fff6e5; padding: 0.5rem 0.8rem; margin: 1rem 0; font-size: 0.9rem; }
table { border-collapse: collapse; margin: 0.5rem 0; font-size: 0.9rem; }
th, td { border-bottom: 1px solid var(--line); padding: 0.25rem 0.5rem; text-align: left; vertical-align: top; }
thead th { background: #eef2f6; }
td.num { text-align: right; font-variant-numeric: tabular-nums; white-space: nowrap; }
table.kv th { font-weight: 600; color: var(--muted); white-space: nowrap; }
caption { text-align: left; font-weight: 600; padding: 0.3rem 0; }
.cols { display: flex; flex-wrap: wrap; gap: 0 2rem; }
.flag { display: inline-block; border: 1px solid var(--warn); color: var(--warn); border-radius: 3px; padding: 0 0.3rem;
  font-size: 0.8rem; margin: 0 0.15rem 0.1rem 0; }
.none { font-weight: 600; color: var(--warn); }
.warn { color: var(--warn); font-weight: 600; }
.verdict-pass { color: #17643a; font-weight: 600; }
.verdict-fail { color: #a12a2a; font-weight: 600; }
.verdict-borderline { color: var(--warn); font-weight: 600; }
.swatch { display: inline-block; width: 0.8em; height: 0.8em; border: 1px solid var(--line); margin-right: 0.25em;
  vertical-align: -0.05em; }
section { overflow-x: auto; }
figure { margin: 0.8rem 0 1.2rem; }
svg.plot { max-width: 100%; height: auto; display: block; }
dt { margin-top: 0.4rem; }
dd { margin-left: 1.5rem; }
ul.warnings code { color: var(--muted); }
footer { margin-top: 2rem; border-top: 1px solid var(--line); color: var(--muted); font-size: 0.8rem; padding-top: 0.5rem; }
@page { size: A4; margin: 14mm 12mm; }
@media print {
  body { max-width: none; margin: 0; padding: 0; font-size: 10pt; }
  .nav { display: none; }
  a { color: inherit; text-decoration: none; }
  figure, table, .caution { break-inside: avoid; page-break-inside: avoid; }
  section { overflow: visible; }
  table { font-size: 7.5pt; max-width: 100%; }
  th, td { padding: 0.08rem 0.2rem; }
  td.num, table.kv th { white-space: normal; }
  h2 { break-after: avoid; page-break-after: avoid; }
  svg.plot { width: 100%; }
}
)css";

std::string page(const std::string& title, const std::string& body) {
  std::string s;
  s.reserve(body.size() + kCss.size() + 512);
  s +=
      "<!DOCTYPE html>\n<html xmlns=\"http://www.w3.org/1999/xhtml\" lang=\"en\">\n<head>\n<meta charset=\"utf-8\"/>\n";
  s += "<meta name=\"viewport\" content=\"width=device-width, initial-scale=1\"/>\n";
  s += "<meta name=\"generator\" content=\"veq " + esc(version()) + "\"/>\n";
  s += "<title>" + esc(title) + "</title>\n<style>" + std::string(kCss) + "</style>\n</head>\n<body>\n";
  s += body;
  s += "</body>\n</html>\n";
  return s;
}

}  // namespace

std::string to_html(const Analysis& a, const HtmlOptions& options) {
  if (const auto p = options.validate(); !p.empty()) throw InputError({"report options", 0, 0}, p.front());
  std::string body;
  body += section_header(a, options);
  body += section_method_results(a);
  body += section_results(a);
  if (!a.curve.volume_mL.empty()) body += section_curve(a, options);
  if (a.fit.status != fit::FitStatus::not_run || a.fit.best) body += section_fit(a, options);
  if (!a.endpoints.derivatives.d1.empty()) body += section_derivatives(a, options);
  body += section_gran(a, options);
  body += section_indicators(a);
  body += section_flags(a);
  body += section_warnings(a);
  body += section_details(a);
  body += "<footer>Written by veq " + esc(version()) +
          ". veq assists with the numbers; it does not certify a result. The same input always gives the same "
          "report.</footer>\n";
  return page("veq report: " + a.run.facts.sample_id, body);
}

Thumbnail thumbnail(const Analysis& a) {
  constexpr double kPad = 2;
  const Curve& c = a.curve;
  Thumbnail t;
  double x0 = INFINITY, x1 = -INFINITY, y0 = INFINITY, y1 = -INFINITY;
  const std::size_t n = std::min(c.volume_mL.size(), c.value.size());
  for (std::size_t i = 0; i < n; ++i) {
    if (!std::isfinite(c.volume_mL[i]) || !std::isfinite(c.value[i])) continue;
    x0 = std::min(x0, c.volume_mL[i]), x1 = std::max(x1, c.volume_mL[i]);
    y0 = std::min(y0, c.value[i]), y1 = std::max(y1, c.value[i]);
  }
  if (!(x0 < x1)) return t;
  if (!(y0 < y1)) y0 -= 1, y1 += 1;
  auto round1 = [](double v) { return std::round(v * 10.0) / 10.0; };
  auto px = [&](double x) { return round1(kPad + (x - x0) / (x1 - x0) * (kThumbWidth - 2 * kPad)); };
  auto py = [&](double y) { return round1(kThumbHeight - kPad - (y - y0) / (y1 - y0) * (kThumbHeight - 2 * kPad)); };
  for (const auto& e : a.endpoints.endpoints) {
    if (std::isfinite(e.volume_mL)) t.endpoints_px.push_back(std::clamp(px(e.volume_mL), 0.0, kThumbWidth));
  }
  // At most one point per pixel column: a few hundred bytes whatever the run's length.
  int last_col = -1;
  for (std::size_t i = 0; i < n; ++i) {
    if (!std::isfinite(c.volume_mL[i]) || !std::isfinite(c.value[i])) continue;
    const double x = px(c.volume_mL[i]);
    const int col = static_cast<int>(x);
    if (col == last_col && i + 1 != n) continue;
    last_col = col;
    t.points_px.emplace_back(x, py(c.value[i]));
  }
  return t;
}

namespace {

// A thumbnail coordinate to 0.1 px by integer arithmetic: a listing of 10,000
// runs formats millions of them.
void append_tenths(std::string& out, double v) {
  const long t = std::lround(std::clamp(v, -1e6, 1e6) * 10.0);
  if (t < 0) out += '-';
  const long a = t < 0 ? -t : t;
  out += std::to_string(a / 10);
  out += '.';
  out += static_cast<char>('0' + a % 10);
}

}  // namespace

std::string thumbnail_svg(const Thumbnail& t) {
  std::string s = fmt::format(
      "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"thumb\" viewBox=\"0 0 {0} {1}\" width=\"{0}\" height=\"{1}\" "
      "role=\"img\" aria-label=\"titration curve\"><rect x=\"0.5\" y=\"0.5\" width=\"{2}\" height=\"{3}\" "
      "fill=\"#fff\" stroke=\"#ccc\" stroke-width=\"1\"/>",
      svg::coord(kThumbWidth),
      svg::coord(kThumbHeight),
      svg::coord(kThumbWidth - 1),
      svg::coord(kThumbHeight - 1));
  for (double x : t.endpoints_px) {
    s += fmt::format("<line x1=\"{0}\" y1=\"1\" x2=\"{0}\" y2=\"{1}\" stroke=\"{2}\" stroke-width=\"1\"/>",
                     svg::coord(std::clamp(x, 0.0, kThumbWidth)),
                     svg::coord(kThumbHeight - 1),
                     kEndpoint);
  }
  if (t.points_px.size() >= 2) {
    std::string pts;
    pts.reserve(10 * t.points_px.size());
    for (const auto& [x, y] : t.points_px) {
      if (!pts.empty()) pts += ' ';
      append_tenths(pts, std::clamp(x, 0.0, kThumbWidth));
      pts += ',';
      append_tenths(pts, std::clamp(y, 0.0, kThumbHeight));
    }
    s += fmt::format("<polyline points=\"{}\" fill=\"none\" stroke=\"{}\" stroke-width=\"1.2\"/>", pts, kInk);
  }
  s += "</svg>";
  return s;
}

}  // namespace veq::report
