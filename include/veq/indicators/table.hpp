// SPDX-License-Identifier: MIT
// The acid-base indicator table: rows with transition range, pK(In), colours and source; lookup by name.
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace veq::indicators {

// A colour as a handbook names it, with a descriptive sRGB value chosen for that name.
struct Colour {
  std::string name;      // "yellow", "blue-violet", "colourless"
  std::string srgb_hex;  // "#RRGGBB" (upper-case hex)
};

// One transition range of an acid-base indicator (an indicator with two
// ranges, such as thymol blue, is two rows).
struct Indicator {
  std::string name;                  // display name, unique in its table
  std::vector<std::string> aliases;  // other accepted names
  double low_pH = 0.0;               // observed start of the transition [pH]; acid-side colour below
  double high_pH = 0.0;              // observed end of the transition [pH]; base-side colour above
  double pK_In = 0.0;                // indicator acid constant [pK units]; informative only (sources spread)
  Colour acid_colour;                // below low_pH
  Colour base_colour;                // above high_pH
  std::string source;                // where the row's values come from ("from memory" where so)

  // (low_pH + high_pH) / 2 [pH].
  [[nodiscard]] double midpoint_pH() const { return 0.5 * (low_pH + high_pH); }
  // low_pH <= pH <= high_pH.
  [[nodiscard]] bool brackets(double pH) const { return pH >= low_pH && pH <= high_pH; }
  // A one-colour indicator is colourless on one side (phenolphthalein and
  // thymolphthalein on the acid side): its endpoint is where the colour
  // appears or vanishes, at that side's edge, whichever way the pH moves.
  [[nodiscard]] bool colourless_acid_side() const { return acid_colour.name == "colourless"; }
  [[nodiscard]] bool colourless_base_side() const { return base_colour.name == "colourless"; }
};

// Name normalisation used for lookup: lower-case ASCII letters and digits only
// ("m-Cresol purple (alkaline range)" -> "mcresolpurplealkalinerange").
[[nodiscard]] std::string normalise_name(std::string_view name);

// A parsed indicator table. Immutable once built.
class IndicatorTable {
 public:
  // Parses the tab-separated text of an indicator table (format described at
  // the top of src/data/indicators.tsv): '#' comment lines, one header line
  // naming the columns, one row per transition range. Throws veq::InputError
  // with source_name, the line and the column for a missing column, a value
  // that is not a number, a range with low >= high or outside -1..15, a colour
  // that is not #RRGGBB, an empty name or source, or a duplicated name.
  [[nodiscard]] static IndicatorTable parse(std::string_view tsv, const std::string& source_name);

  // The table embedded at build time from src/data/indicators.tsv, parsed once
  // (it is constant data).
  [[nodiscard]] static const IndicatorTable& builtin();

  [[nodiscard]] const std::vector<Indicator>& rows() const { return m_rows; }

  // The row called name (ignoring case, spaces and punctuation; aliases
  // count), or the only row whose name starts with it. Throws veq::InputError
  // (source "--indicator") naming the closest matches when there is no such
  // row or when several rows match ("thymol blue" has two ranges).
  [[nodiscard]] const Indicator& find(std::string_view name) const;

  // Names of up to max_count rows closest to name (shared prefix, contained,
  // or small edit distance), best first; empty when nothing is close.
  [[nodiscard]] std::vector<std::string> close_matches(std::string_view name, std::size_t max_count = 5) const;

  // Rows whose range contains pH [pH], ranked by |midpoint - pH| (ties by
  // table order). Pointers into this table.
  [[nodiscard]] std::vector<const Indicator*> bracketing(double pH) const;

 private:
  std::vector<Indicator> m_rows;
};

}  // namespace veq::indicators
