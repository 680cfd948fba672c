// SPDX-License-Identifier: MIT
// The readable report of one run: a self-contained HTML page with SVG plots.
#pragma once

#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include "veq/analyze.hpp"

namespace veq::report {

struct HtmlOptions {
  // Link shown at the top back to a listing (a batch's "../index.html");
  // empty: no link.
  std::string index_href;
  // Width of each plot [px]; plots scale down to the page (A4 when printed).
  int plot_width_px = 720;
  // Height of the titration-curve plot [px]; derivative and Gran plots are
  // 0.6 of it.
  int plot_height_px = 360;

  // One line per problem; empty when valid.
  [[nodiscard]] std::vector<std::string> validate() const;
};

// The run's report as one HTML page (polyglot HTML5: also well-formed XML),
// with inline CSS and inline SVG only: no script, no external asset, readable
// offline and printable on A4. Sections appear only when their data exist:
// the results table with uncertainties, the titration curve with endpoint
// markers and their uncertainty bands, the first and second derivative, one
// Gran plot per fitted branch (readings used, regression line, window),
// quality flags, warnings, the run's facts, metadata and dialect, and always
// the safety caution. All text taken from the file (metadata, names, notes) is
// escaped. Same analysis, same bytes (no timestamps).
[[nodiscard]] std::string to_html(const Analysis& analysis, const HtmlOptions& options = {});

// A small picture of the curve for listings such as a batch's index.html:
// the curve as a polyline in pixel coordinates of a kThumbWidth x
// kThumbHeight frame (at most one point per pixel column, rounded to 0.1 px),
// and the position of each endpoint. Plain numbers, so that a batch can store
// it and draw it later.
struct Thumbnail {
  std::vector<std::pair<double, double>> points_px;
  std::vector<double> endpoints_px;
};
inline constexpr double kThumbWidth = 120;  // [px]
inline constexpr double kThumbHeight = 36;  // [px]
[[nodiscard]] Thumbnail thumbnail(const Analysis& analysis);
// The thumbnail as an inline SVG element (an empty frame when it has no points).
[[nodiscard]] std::string thumbnail_svg(const Thumbnail& thumbnail);

// Text made safe for HTML and XML element content and quoted attribute
// values: & < > " ' become character references; invalid UTF-8 becomes
// U+FFFD; control characters other than tab, LF and CR (not allowed in XML
// 1.0) become U+FFFD as well.
[[nodiscard]] std::string html_escape(std::string_view text);

}  // namespace veq::report
