// SPDX-License-Identifier: MIT
// A small SVG writer for the report's plots: axes with round ticks, lines, points, bands, labels.
#pragma once

#include <span>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace veq::report::svg {

// How an element is drawn (SVG presentation attributes, so that a plot keeps
// its look when copied out of the page).
struct Style {
  std::string_view stroke = "none";
  std::string_view fill = "none";
  double stroke_width = 1.5;
  double opacity = 1.0;
  std::string_view dash;  // stroke-dasharray, e.g. "4 3"; empty: solid
};

// A stroked line or outline, and a filled shape.
[[nodiscard]] inline Style stroke(std::string_view color,
                                  double width = 1.5,
                                  std::string_view dash = {},
                                  double opacity = 1.0) {
  Style s;
  s.stroke = color, s.stroke_width = width, s.dash = dash, s.opacity = opacity;
  return s;
}
[[nodiscard]] inline Style fill(std::string_view color, double opacity = 1.0) {
  Style s;
  s.fill = color, s.opacity = opacity;
  return s;
}

// Round tick values covering [lo, hi]: steps of 1, 2 or 5 times a power of
// ten, about `count` of them. The returned range starts and ends on a tick.
struct Ticks {
  double lo = 0.0;
  double hi = 1.0;
  double step = 1.0;
  int decimals = 0;  // decimals that show every tick exactly
  std::vector<double> values;
};
[[nodiscard]] Ticks nice_ticks(double lo, double hi, int count);

// A coordinate for SVG output [px]: one decimal (rounded half away from
// zero), never "-0.0"; non-finite values as 0.0.
[[nodiscard]] std::string coord(double px);
void append_coord(std::string& out, double px);

using Points = std::vector<std::pair<double, double>>;

// One plot in data coordinates. Elements are clipped to the plot area; call
// finish() once for the SVG text. id must be unique within the page (it names
// the clip path and the title).
class Plot {
 public:
  Plot(std::string id, std::string title, double width_px, double height_px);

  // Axis ranges (widened to round ticks) and labels; call before drawing.
  // Non-finite or empty ranges become [0, 1].
  void x_axis(double lo, double hi, std::string label);
  void y_axis(double lo, double hi, std::string label);

  void polyline(std::span<const std::pair<double, double>> points, const Style& style);
  void dots(std::span<const std::pair<double, double>> points, double radius_px, const Style& style);
  void segment(double x0, double y0, double x1, double y1, const Style& style);
  // A vertical band from x0 to x1 over the whole height (at least 1 px wide).
  void x_band(double x0, double x1, const Style& style);
  // A horizontal band from y0 to y1 over the whole width (at least 1 px high).
  void y_band(double y0, double y1, const Style& style);
  void vline(double x, const Style& style);
  void hline(double y, const Style& style);
  // Text at a data position, anchored "start", "middle" or "end".
  void text(double x, double y, std::string_view text, std::string_view anchor = "middle");
  // A legend entry (drawn in a row above the plot area, in order).
  void legend(std::string_view label, const Style& style);

  [[nodiscard]] std::string finish() const;

  [[nodiscard]] double x_px(double x) const;
  [[nodiscard]] double y_px(double y) const;

 private:
  std::string m_id;
  std::string m_title;
  double m_w, m_h;
  double m_left = 64, m_right = 16, m_top = 26, m_bottom = 44;  // the legend sits in the top margin
  Ticks m_x, m_y;
  std::string m_x_label, m_y_label;
  std::string m_body;    // clipped content
  std::string m_labels;  // unclipped text
  std::vector<std::pair<std::string, Style>> m_legend;
};

// The attributes of a style: ` stroke="…" fill="…" …`.
[[nodiscard]] std::string attributes(const Style& style);

}  // namespace veq::report::svg
