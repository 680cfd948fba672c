// SPDX-License-Identifier: MIT
// SVG plots written by hand: deterministic text, presentation attributes, escaped labels.
#include "report/svg.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <charconv>
#include <cmath>

#include "veq/report/html.hpp"

namespace veq::report::svg {

std::string coord(double px) {
  std::string s;
  append_coord(s, px);
  return s;
}

void append_coord(std::string& out, double px) {
  // Tenths of a pixel by integer arithmetic: a page holds thousands of
  // coordinates; this is many times faster than formatting doubles, and a
  // tenth of a pixel is finer than any screen or printer shows.
  if (!std::isfinite(px)) px = 0.0;
  const long long t = std::llround(std::clamp(px, -1e12, 1e12) * 10.0);
  const unsigned long long a = t < 0 ? static_cast<unsigned long long>(-t) : static_cast<unsigned long long>(t);
  if (t < 0) out += '-';
  char buf[24];
  const auto [end, ec] = std::to_chars(buf, buf + sizeof buf, a / 10);
  (void)ec;
  out.append(buf, end);
  out += '.';
  out += static_cast<char>('0' + a % 10);
}

Ticks nice_ticks(double lo, double hi, int count) {
  Ticks t;
  if (!std::isfinite(lo) || !std::isfinite(hi)) lo = 0.0, hi = 1.0;
  if (hi < lo) std::swap(lo, hi);
  if (hi - lo <= 1e-12 * std::max(1.0, std::fabs(hi))) {
    const double pad = std::fabs(lo) > 0 ? 0.05 * std::fabs(lo) : 0.5;
    lo -= pad, hi += pad;
  }
  count = std::max(count, 2);
  const double raw = (hi - lo) / (count - 1);
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / mag;
  const double nice = f <= 1.0 ? 1.0 : f <= 2.0 ? 2.0 : f <= 5.0 ? 5.0 : 10.0;
  t.step = nice * mag;
  t.lo = std::floor(lo / t.step + 1e-9) * t.step;
  t.hi = std::ceil(hi / t.step - 1e-9) * t.step;
  t.decimals = std::max(0, -static_cast<int>(std::floor(std::log10(t.step) + 1e-9)));
  const long n = std::lround((t.hi - t.lo) / t.step);
  for (long i = 0; i <= n; ++i) t.values.push_back(t.lo + static_cast<double>(i) * t.step);
  return t;
}

std::string attributes(const Style& s) {
  std::string a = fmt::format(" stroke=\"{}\" fill=\"{}\"", s.stroke, s.fill);
  if (s.stroke != "none") a += fmt::format(" stroke-width=\"{}\"", coord(s.stroke_width));
  if (s.opacity < 1.0) a += fmt::format(" opacity=\"{}\"", coord(s.opacity));
  if (!s.dash.empty()) a += fmt::format(" stroke-dasharray=\"{}\"", s.dash);
  return a;
}

Plot::Plot(std::string id, std::string title, double width_px, double height_px)
    : m_id(std::move(id)), m_title(std::move(title)), m_w(width_px), m_h(height_px) {
  m_x = nice_ticks(0, 1, 6);
  m_y = nice_ticks(0, 1, 5);
}

void Plot::x_axis(double lo, double hi, std::string label) {
  m_x = nice_ticks(lo, hi, std::max(3, static_cast<int>(m_w / 90)));
  m_x_label = std::move(label);
}

void Plot::y_axis(double lo, double hi, std::string label) {
  m_y = nice_ticks(lo, hi, std::max(3, static_cast<int>(m_h / 50)));
  m_y_label = std::move(label);
}

double Plot::x_px(double x) const {
  return m_left + (x - m_x.lo) / (m_x.hi - m_x.lo) * (m_w - m_left - m_right);
}

double Plot::y_px(double y) const {
  return m_h - m_bottom - (y - m_y.lo) / (m_y.hi - m_y.lo) * (m_h - m_top - m_bottom);
}

namespace {

// Keeps a point drawable: far outside the plot it is pulled to a finite
// distance so that clipping still draws the visible part of a line.
double clamp_px(double px, double size) {
  return std::clamp(px, -4 * size, 5 * size);
}

}  // namespace

void Plot::polyline(std::span<const std::pair<double, double>> points, const Style& style) {
  std::string pts;
  std::size_t n = 0;
  auto flush = [&] {
    if (n >= 2) m_body += "<polyline points=\"" + pts + "\"" + attributes(style) + "/>\n";
    pts.clear();
    n = 0;
  };
  for (const auto& [x, y] : points) {
    if (!std::isfinite(x) || !std::isfinite(y)) {
      flush();
      continue;
    }
    if (n > 0) pts += ' ';
    append_coord(pts, clamp_px(x_px(x), m_w));
    pts += ',';
    append_coord(pts, clamp_px(y_px(y), m_h));
    ++n;
  }
  flush();
}

void Plot::dots(std::span<const std::pair<double, double>> points, double radius_px, const Style& style) {
  // Filled dots: one path of zero-length segments with round caps, which SVG
  // draws as discs of the stroke width (SVG 1.1, 'stroke-linecap': zero-length
  // subpaths are drawn with round and square caps): a few bytes per reading.
  // Rings (outline only) are two arcs each.
  const bool filled = style.fill != "none";
  std::string tail;
  if (filled) {
    tail = "h0";
  } else {
    std::string r;
    append_coord(r, radius_px);
    tail = "m-" + r + " 0a" + r + " " + r + " 0 1 0 " + coord(2 * radius_px) + " 0a" + r + " " + r + " 0 1 0 " +
           coord(-2 * radius_px) + " 0";
  }
  std::string d;
  d.reserve(points.size() * (tail.size() + 14));
  for (const auto& [x, y] : points) {
    if (!std::isfinite(x) || !std::isfinite(y)) continue;
    const double px = x_px(x), py = y_px(y);
    if (px < -radius_px || px > m_w + radius_px || py < -radius_px || py > m_h + radius_px) continue;
    d += 'M';
    append_coord(d, px);
    d += ' ';
    append_coord(d, py);
    d += tail;
  }
  if (d.empty()) return;
  if (filled) {
    Style line = stroke(style.fill, 2 * radius_px, {}, style.opacity);
    m_body += "<path d=\"" + d + "\"" + attributes(line) + " stroke-linecap=\"round\"/>\n";
  } else {
    m_body += "<path d=\"" + d + "\"" + attributes(style) + "/>\n";
  }
}

void Plot::segment(double x0, double y0, double x1, double y1, const Style& style) {
  if (!std::isfinite(x0) || !std::isfinite(y0) || !std::isfinite(x1) || !std::isfinite(y1)) return;
  m_body += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"{}/>\n",
                        coord(clamp_px(x_px(x0), m_w)),
                        coord(clamp_px(y_px(y0), m_h)),
                        coord(clamp_px(x_px(x1), m_w)),
                        coord(clamp_px(y_px(y1), m_h)),
                        attributes(style));
}

void Plot::x_band(double x0, double x1, const Style& style) {
  if (!std::isfinite(x0) || !std::isfinite(x1)) return;
  double a = clamp_px(x_px(std::min(x0, x1)), m_w), b = clamp_px(x_px(std::max(x0, x1)), m_w);
  if (b - a < 1.0) {
    const double mid = 0.5 * (a + b);
    a = mid - 0.5, b = mid + 0.5;
  }
  m_body += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"{}/>\n",
                        coord(a),
                        coord(m_top),
                        coord(b - a),
                        coord(m_h - m_top - m_bottom),
                        attributes(style));
}

void Plot::y_band(double y0, double y1, const Style& style) {
  if (!std::isfinite(y0) || !std::isfinite(y1)) return;
  double a = clamp_px(y_px(std::max(y0, y1)), m_h), b = clamp_px(y_px(std::min(y0, y1)), m_h);
  a = std::max(a, m_top);
  b = std::min(b, m_h - m_bottom);
  if (b - a < 1.0) return;  // outside the plotted range
  m_body += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"{}/>\n",
                        coord(m_left),
                        coord(a),
                        coord(m_w - m_left - m_right),
                        coord(b - a),
                        attributes(style));
}

void Plot::vline(double x, const Style& style) {
  if (!std::isfinite(x)) return;
  const double px = x_px(x);
  m_body += fmt::format("<line x1=\"{0}\" y1=\"{1}\" x2=\"{0}\" y2=\"{2}\"{3}/>\n",
                        coord(px),
                        coord(m_top),
                        coord(m_h - m_bottom),
                        attributes(style));
}

void Plot::hline(double y, const Style& style) {
  if (!std::isfinite(y)) return;
  const double py = y_px(y);
  m_body += fmt::format("<line x1=\"{0}\" y1=\"{1}\" x2=\"{2}\" y2=\"{1}\"{3}/>\n",
                        coord(m_left),
                        coord(py),
                        coord(m_w - m_right),
                        attributes(style));
}

void Plot::text(double x, double y, std::string_view text, std::string_view anchor) {
  if (!std::isfinite(x) || !std::isfinite(y)) return;
  const double px = std::clamp(x_px(x), m_left, m_w - m_right);
  const double py = std::clamp(y_px(y), m_top + 10, m_h - m_bottom);
  m_labels += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"{}\" font-size=\"11\" fill=\"#333\">{}</text>\n",
                          coord(px),
                          coord(py),
                          anchor,
                          html_escape(text));
}

void Plot::legend(std::string_view label, const Style& style) {
  m_legend.emplace_back(std::string(label), style);
}

std::string Plot::finish() const {
  const double x0 = m_left, x1 = m_w - m_right, y0 = m_top, y1 = m_h - m_bottom;
  // Legend entries in rows across the top: an entry that would pass the right edge starts a new row,
  // and every row after the first moves the plot down by kLegendRow (the picture grows; nothing is cut).
  constexpr double kLegendRow = 15.0;
  struct Placed {
    double x, y;
  };
  std::vector<Placed> placed;
  double lx = x0, ly = 12.0;
  for (const auto& [label, style] : m_legend) {
    (void)style;
    const double width = 23 + 6.2 * static_cast<double>(label.size());
    if (lx > x0 && lx + width > m_w - 4) lx = x0, ly += kLegendRow;
    placed.push_back({lx, ly});
    lx += width + 18;
  }
  const double shift = ly - 12.0;
  std::string s;
  s.reserve(m_body.size() + m_labels.size() + 4096);
  s += fmt::format(
      "<svg xmlns=\"http://www.w3.org/2000/svg\" class=\"plot\" viewBox=\"0 0 {0} {1}\" width=\"{0}\" height=\"{1}\" "
      "role=\"img\" aria-labelledby=\"{2}-title\" font-family=\"sans-serif\">\n"
      "<title id=\"{2}-title\">{3}</title>\n",
      coord(m_w),
      coord(m_h + shift),
      m_id,
      html_escape(m_title));
  for (std::size_t i = 0; i < m_legend.size(); ++i) {
    Style mark = m_legend[i].second;
    if (mark.stroke == "none") mark.stroke = mark.fill;
    mark.stroke_width = std::max(mark.stroke_width, 2.5);
    if (mark.opacity < 0.5) mark.opacity = 0.5;
    s += fmt::format("<line x1=\"{}\" y1=\"{}\" x2=\"{}\" y2=\"{}\"{}/>\n",
                     coord(placed[i].x),
                     coord(placed[i].y),
                     coord(placed[i].x + 18),
                     coord(placed[i].y),
                     attributes(mark));
    s += fmt::format("<text x=\"{}\" y=\"{}\" font-size=\"11\" fill=\"#333\">{}</text>\n",
                     coord(placed[i].x + 23),
                     coord(placed[i].y + 4),
                     html_escape(m_legend[i].first));
  }
  if (shift > 0) s += fmt::format("<g transform=\"translate(0 {})\">\n", coord(shift));
  s += fmt::format(
      "<defs><clipPath id=\"{}-clip\"><rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\"/></clipPath></defs>\n",
      m_id,
      coord(x0),
      coord(y0),
      coord(x1 - x0),
      coord(y1 - y0));
  s += fmt::format(
      "<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" fill=\"#fff\" stroke=\"#888\" stroke-width=\"1\"/>\n",
      coord(x0),
      coord(y0),
      coord(x1 - x0),
      coord(y1 - y0));
  // Grid and tick labels.
  for (double v : m_x.values) {
    const double px = x_px(v);
    s += fmt::format("<line x1=\"{0}\" y1=\"{1}\" x2=\"{0}\" y2=\"{2}\" stroke=\"#e3e3e3\" stroke-width=\"1\"/>\n",
                     coord(px),
                     coord(y0),
                     coord(y1));
    s += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"11\" fill=\"#333\">{:.{}f}</text>\n",
                     coord(px),
                     coord(y1 + 15),
                     v == 0.0 ? 0.0 : v,
                     m_x.decimals);
  }
  for (double v : m_y.values) {
    const double py = y_px(v);
    s += fmt::format("<line x1=\"{1}\" y1=\"{0}\" x2=\"{2}\" y2=\"{0}\" stroke=\"#e3e3e3\" stroke-width=\"1\"/>\n",
                     coord(py),
                     coord(x0),
                     coord(x1));
    s += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"end\" font-size=\"11\" fill=\"#333\">{:.{}f}</text>\n",
                     coord(x0 - 5),
                     coord(py + 4),
                     v == 0.0 ? 0.0 : v,
                     m_y.decimals);
  }
  s += fmt::format("<text x=\"{}\" y=\"{}\" text-anchor=\"middle\" font-size=\"12\" fill=\"#111\">{}</text>\n",
                   coord(0.5 * (x0 + x1)),
                   coord(m_h - 8),
                   html_escape(m_x_label));
  s += fmt::format(
      "<text x=\"14\" y=\"{0}\" text-anchor=\"middle\" font-size=\"12\" fill=\"#111\" transform=\"rotate(-90 14 "
      "{0})\">{1}"
      "</text>\n",
      coord(0.5 * (y0 + y1)),
      html_escape(m_y_label));
  s += fmt::format("<g clip-path=\"url(#{}-clip)\">\n", m_id);
  s += m_body;
  s += "</g>\n";
  s += m_labels;
  if (shift > 0) s += "</g>\n";
  s += "</svg>\n";
  return s;
}

}  // namespace veq::report::svg
