// SPDX-License-Identifier: MIT
// The ingest stage: sniff the dialect, find the table, read the readings, or say exactly what is wrong.
#include "veq/ingest/reader.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <array>
#include <cerrno>
#include <cmath>
#include <cstdio>
#include <cstring>
#include <map>
#include <numeric>

#include "ingest/columns.hpp"
#include "ingest/decode.hpp"
#include "ingest/metadata.hpp"
#include "ingest/text.hpp"

namespace veq::ingest {
namespace {

using detail::Field;
using detail::HeaderInfo;
using detail::NumberStatus;
using detail::Quantity;

struct Candidate {
  char sep;
  char dec;
};

// Order matters only to break ties: explicit separators before runs of spaces,
// decimal point before decimal comma.
constexpr std::array<Candidate, 10> kCandidates = {{{',', '.'},
                                                    {';', '.'},
                                                    {'\t', '.'},
                                                    {'|', '.'},
                                                    {';', ','},
                                                    {'\t', ','},
                                                    {'|', ','},
                                                    {detail::kWhitespace, '.'},
                                                    {detail::kWhitespace, ','},
                                                    {',', ','}}};

constexpr std::size_t kSampleLines = 2000;
constexpr std::size_t kMaxNoteChars = 500;  // a line after the table kept as a note, at most
constexpr std::size_t kSampleBytes = std::size_t{1} << 20;

struct Shape {
  std::size_t fields = 0;
  std::size_t numeric = 0;
  bool comma_decimal = false;
  bool numeric_row = false;
};

Shape shape_of(std::string_view line, Candidate c, std::vector<Field>& scratch) {
  detail::split_fields(line, c.sep, scratch);
  Shape s;
  s.fields = scratch.size();
  for (const auto& f : scratch) {
    double v = 0.0;
    if (detail::parse_number(f.text, c.dec, v) == NumberStatus::ok) {
      ++s.numeric;
      if (f.text.find(',') != std::string_view::npos) s.comma_decimal = true;
    }
  }
  s.numeric_row = s.fields >= 2 && s.numeric >= 2 && 2 * s.numeric >= s.fields;
  return s;
}

struct Sniffed {
  Candidate cand{',', '.'};
  std::size_t columns = 0;  // modal field count of the numeric rows
  double score = 0.0;
};

// The separators a line holds, one bit each (kWhitespace: a space or a tab).
unsigned separator_bit(char sep) {
  switch (sep) {
    case ',':
      return 1u;
    case ';':
      return 2u;
    case '\t':
      return 4u;
    case '|':
      return 8u;
    case detail::kWhitespace:
      return 16u;
    default:
      return 0u;
  }
}

unsigned separators_in(std::string_view line) {
  unsigned m = 0;
  for (const char c : line) {
    if (c == ' ' || c == '\t') m |= separator_bit(detail::kWhitespace);
    if (c == ',' || c == ';' || c == '\t' || c == '|') m |= separator_bit(c);
  }
  return m;
}

Sniffed sniff(const std::vector<std::string>& lines) {
  Sniffed best;
  std::vector<Field> scratch;
  // Once per line: which separators it holds (0 for a blank line, which no candidate reads).
  std::vector<unsigned> holds(lines.size(), 0u);
  // A decimal comma needs one written in a numeric field: no line with a comma, no such candidate; and
  // with the comma also the separator, only a quoted field can hold one (the unquoted are split at it).
  bool any_comma = false, any_quoted_comma = false;
  for (std::size_t i = 0; i < lines.size(); ++i) {
    const std::string& l = lines[i];
    if (l.find(',') != std::string::npos) {
      any_comma = true;
      any_quoted_comma = any_quoted_comma || l.find('"') != std::string::npos;
    }
    if (!detail::is_blank(l)) holds[i] = separators_in(l) | 32u;  // 32: not blank
  }
  std::vector<Shape> shapes;  // the numeric rows only: no other line adds to a score
  for (const Candidate c : kCandidates) {
    if (c.dec == ',' && (!any_comma || (c.sep == ',' && !any_quoted_comma))) continue;  // the same verdict, unread
    // A line without the separator is one field, never a numeric row, and a numeric row adds at most 1 to
    // the score: a candidate whose separator is in no more lines than the best score cannot win.
    const unsigned bit = separator_bit(c.sep);
    std::size_t with_sep = 0;
    for (const unsigned h : holds) with_sep += (h & bit) != 0 ? 1 : 0;
    if (static_cast<double>(with_sep) <= best.score + 1e-9) continue;
    shapes.clear();
    bool evidence = false;
    std::map<std::size_t, std::size_t> counts;
    for (std::size_t i = 0; i < lines.size(); ++i) {
      if ((holds[i] & bit) == 0) continue;
      const Shape s = shape_of(lines[i], c, scratch);
      if (!s.numeric_row) continue;
      ++counts[s.fields];
      evidence = evidence || s.comma_decimal;
      shapes.push_back(s);
    }
    if (c.dec == ',' && !evidence) continue;  // a decimal comma needs one written
    if (counts.empty()) continue;
    std::size_t modal = 0, modal_n = 0;
    for (auto [fields, n] : counts) {
      if (n >= modal_n) modal = fields, modal_n = n;
    }
    double score = 0.0;
    for (const auto& s : shapes) {
      if (s.fields == modal) score += static_cast<double>(s.numeric) / static_cast<double>(s.fields);
    }
    if (score > best.score + 1e-9) best = {c, modal, score};
  }
  return best;
}

// Splits a header line into exactly `want` names where that is possible.
std::vector<std::string> split_header(std::string_view line, char sep, std::size_t want) {
  std::vector<Field> f;
  detail::split_fields(line, sep, f);
  std::vector<std::string> names;
  for (const auto& x : f) names.emplace_back(x.text);
  if (sep != detail::kWhitespace || names.size() == want) return names;
  // Names with spaces in a space-aligned table: columns apart by 2+ spaces or a tab.
  std::vector<std::string> wide;
  std::string cur;
  std::string_view s = detail::trim(line);
  for (std::size_t i = 0; i < s.size(); ++i) {
    const bool gap = s[i] == '\t' || (s[i] == ' ' && i + 1 < s.size() && s[i + 1] == ' ');
    if (gap) {
      if (!cur.empty()) wide.push_back(std::string(detail::trim(cur)));
      cur.clear();
      while (i + 1 < s.size() && (s[i + 1] == ' ' || s[i + 1] == '\t')) ++i;
    } else {
      cur.push_back(s[i]);
    }
  }
  if (!cur.empty()) wide.push_back(std::string(detail::trim(cur)));
  if (wide.size() == want) return wide;
  // Or single spaces with units in brackets: "Volume (mL) pH" -> "Volume (mL)", "pH".
  std::vector<std::string> merged;
  for (const auto& n : names) {
    if (!merged.empty() && (n.front() == '(' || n.front() == '['))
      merged.back() += " " + n;
    else
      merged.push_back(n);
  }
  return merged;
}

bool is_units_row(const std::vector<std::string>& cells) {
  bool any = false;
  for (const auto& c : cells) {
    std::string_view t = detail::trim(c);
    if (t.empty()) continue;
    if ((t.front() == '(' && t.back() == ')') || (t.front() == '[' && t.back() == ']')) {
      t = detail::trim(t.substr(1, t.size() - 2));
    }
    if (t.empty() || t == "-" || t == "--") continue;  // "no unit" (pH), as exports write it: [-], [ ], ()
    if (!detail::find_unit(t)) return false;
    any = true;
  }
  return any;
}

class Reader {
 public:
  Reader(std::string source, const IngestOptions& options, std::uint64_t size_hint)
      : m_source(std::move(source)), m_opt(options), m_size_hint(size_hint) {}

  Run read(std::unique_ptr<detail::RawSource> raw);

 private:
  [[noreturn]] void fail(std::size_t line,
                         std::size_t column,
                         const std::string& message,
                         const std::string& hint = {}) const {
    throw InputError({m_source, line, column}, message, hint);
  }
  void warn(std::string code, std::string message, std::size_t line = 0, std::size_t column = 0) {
    m_run.warnings.push_back({std::move(code), std::move(message), {m_source, line, column}});
  }
  void check_line_length(std::string_view line, std::size_t line_no) const {
    if (line.size() > m_opt.max_line_bytes) {
      fail(line_no,
           0,
           fmt::format("line is {} bytes long; a titration log line is expected to be under {} bytes",
                       line.size(),
                       m_opt.max_line_bytes),
           "this does not look like a pH/mV-versus-volume export");
    }
  }
  void choose_columns(const std::vector<std::string>& header, std::size_t header_line);
  void take_row(std::string_view line, std::size_t line_no);
  void finish();

  std::string m_source;
  IngestOptions m_opt;
  std::uint64_t m_size_hint = 0;  // bytes in the whole input, when known (0: unknown)
  Run m_run;
  Candidate m_cand{',', '.'};
  std::size_t m_table_columns = 0;
  std::size_t m_vol = 0, m_sig = 1;
  std::optional<std::size_t> m_temp, m_time;
  double m_vol_factor = 1.0, m_sig_factor = 1.0;
  bool m_vol_unit_assumed = false;       // mL taken for a volume column that states no unit
  std::size_t m_header_repeated_at = 0;  // the line of the last header repeated inside the table
  bool m_after_repeated_header = false;  // the next reading follows a repeated header
  double m_temp_factor = 1.0, m_temp_offset = 0.0, m_time_factor = 1.0;
  std::vector<Field> m_fields;
  std::vector<std::string> m_header;  // header cells, to recognise a header repeated inside the table
  std::size_t m_repeated_headers = 0;
  struct Pending {
    std::size_t line;
    std::size_t column;
    std::string text;
    std::string what;       // which column held it, or "row"
    std::string line_text;  // the whole line (trimmed), kept as the note when the table has ended
  };
  std::vector<Pending> m_pending;
  std::size_t m_empty_cells = 0;
  int m_max_decimals = -2;  // -2: none seen, -1: exponent notation seen
  bool m_temp_bad_warned = false;
};

void Reader::choose_columns(const std::vector<std::string>& header, std::size_t header_line) {
  const ColumnOverrides& ov = m_opt.columns;
  std::vector<HeaderInfo> info(header.size());
  for (std::size_t i = 0; i < header.size(); ++i) info[i] = detail::classify_header(header[i]);
  auto column_of = [&](std::size_t i) -> std::size_t { return i + 1; };
  auto find_first = [&](Quantity q) -> std::optional<std::size_t> {
    for (std::size_t i = 0; i < info.size(); ++i) {
      if (info[i].quantity == q) return i;
    }
    return std::nullopt;
  };
  auto check_index = [&](std::size_t one_based, const char* what) {
    if (one_based == 0 || one_based > m_table_columns) {
      fail(0,
           0,
           fmt::format("--columns {}={} but the table has {} columns", what, one_based, m_table_columns),
           "columns are numbered from 1, as a spreadsheet shows them");
    }
    return one_based - 1;
  };

  std::optional<std::size_t> vol =
      ov.volume ? std::optional(check_index(*ov.volume, "volume")) : find_first(Quantity::volume);
  std::optional<std::size_t> sig;
  SignalKind kind = SignalKind::ph;
  if (ov.signal) {
    sig = check_index(*ov.signal, "signal");
    if (*sig < info.size() && info[*sig].quantity == Quantity::potential) kind = SignalKind::mv;
  } else if (auto ph = find_first(Quantity::ph)) {
    sig = ph;
    if (auto mv = find_first(Quantity::potential)) {
      warn("two_signals",
           fmt::format("both a pH column ('{}') and a potential column ('{}'); using pH",
                       detail::excerpt(header[*ph]),
                       detail::excerpt(header[*mv])),
           header_line);
    }
  } else if (auto mv = find_first(Quantity::potential)) {
    sig = mv;
    kind = SignalKind::mv;
  }
  if (m_opt.signal) kind = *m_opt.signal;

  const bool have_header = !header.empty();
  if (!vol || !sig) {
    if (!have_header && m_table_columns == 2) {
      vol = vol.value_or(0);
      sig = sig.value_or(1);
      m_vol_unit_assumed = !m_opt.volume_unit;
      warn(
          "no_header",
          std::string("no header row: reading column 1 as volume (mL) and column 2 as ") + std::string(to_string(kind)),
          m_run.dialect.first_data_line);
    } else if (!have_header) {
      fail(m_run.dialect.first_data_line,
           0,
           fmt::format("the table has {} columns and no header row; cannot tell which column is the volume "
                       "and which the signal",
                       m_table_columns),
           "add a header, or pass --columns volume=N,signal=M");
    } else if (!vol) {
      std::string names;
      for (const auto& h : header) names += (names.empty() ? "'" : ", '") + detail::excerpt(h) + "'";
      fail(header_line,
           0,
           "no volume column in the header (found " + names + ")",
           "name it e.g. 'Volume (mL)', or pass --columns volume=N,signal=M");
    } else {
      std::string names;
      for (const auto& h : header) names += (names.empty() ? "'" : ", '") + detail::excerpt(h) + "'";
      fail(header_line,
           0,
           "no pH or potential (mV) column in the header (found " + names + ")",
           "name it e.g. 'pH' or 'E (mV)', or pass --columns volume=N,signal=M");
    }
  }
  m_vol = *vol;
  m_sig = *sig;
  if (m_vol == m_sig) fail(header_line, 0, "the volume and signal columns are the same column");
  m_run.signal = kind;

  // Units of volume and signal.
  auto header_of = [&](std::size_t i) { return i < header.size() ? header[i] : std::string(); };
  m_run.volume_column = {m_vol, header_of(m_vol), "mL"};
  m_run.signal_column = {m_sig, header_of(m_sig), std::string(to_string(kind))};
  if (m_vol < info.size()) {
    const HeaderInfo& h = info[m_vol];
    if (h.unit_unknown || (h.unit && h.unit->quantity != Quantity::volume && !ov.volume)) {
      fail(header_line,
           column_of(m_vol),
           fmt::format("unknown volume unit '{}' in column '{}'; expected mL, uL or L",
                       detail::excerpt(h.unit_text),
                       detail::excerpt(header[m_vol])),
           "or pass --volume-unit mL|uL|L");
    }
    if (h.unit && h.unit->quantity == Quantity::volume) {
      m_vol_factor = h.unit->factor;
      m_run.volume_column.unit = h.unit->name;
    } else if (!m_opt.volume_unit && have_header) {
      m_vol_unit_assumed = true;
      warn("volume_unit_assumed",
           fmt::format("volume column '{}' states no unit; assuming mL", detail::excerpt(header[m_vol])),
           header_line,
           column_of(m_vol));
    }
  }
  if (m_opt.volume_unit) {
    auto u = detail::find_unit(*m_opt.volume_unit);
    if (!u || u->quantity != Quantity::volume) {
      throw InputError({"--volume-unit", 0, 0},
                       "unknown volume unit '" + detail::excerpt(*m_opt.volume_unit) + "'",
                       "expected mL, uL or L");
    }
    m_vol_factor = u->factor;
    m_run.volume_column.unit = u->name;
  }
  if (m_sig < info.size()) {
    const HeaderInfo& h = info[m_sig];
    if (h.unit_unknown) {
      fail(header_line,
           column_of(m_sig),
           fmt::format("unknown unit '{}' in signal column '{}'; expected pH, mV or V",
                       detail::excerpt(h.unit_text),
                       detail::excerpt(header[m_sig])),
           "write the unit as pH, mV or V, or pass --signal pH|mV");
    }
    if (kind == SignalKind::mv && h.unit && h.unit->quantity == Quantity::potential) {
      m_sig_factor = h.unit->factor;
      m_run.signal_column.unit = h.unit->name;
    }
  }
  // Optional columns: temperature and time.
  auto optional_column =
      [&](Quantity q, std::optional<std::size_t> forced, const char* what) -> std::optional<std::size_t> {
    std::optional<std::size_t> idx = forced ? std::optional(check_index(*forced, what)) : find_first(q);
    if (!idx || *idx == m_vol || *idx == m_sig) return std::nullopt;
    if (*idx < info.size() && info[*idx].unit_unknown) {
      warn("column_unit_unknown",
           fmt::format("{} column '{}' has unit '{}', which is not understood; column ignored",
                       what,
                       detail::excerpt(header[*idx]),
                       detail::excerpt(info[*idx].unit_text)),
           header_line,
           column_of(*idx));
      return std::nullopt;
    }
    return idx;
  };
  m_temp = optional_column(Quantity::temperature, ov.temperature, "temperature");
  if (m_temp) {
    m_run.temperature_column = Column{*m_temp, header_of(*m_temp), "degC"};
    if (*m_temp < info.size() && info[*m_temp].unit) {
      m_temp_factor = info[*m_temp].unit->factor;
      m_temp_offset = info[*m_temp].unit->offset;
      m_run.temperature_column->unit = info[*m_temp].unit->name;
    }
  }
  m_time = optional_column(Quantity::time, ov.time, "time");
  if (m_time) {
    m_run.time_column = Column{*m_time, header_of(*m_time), "s"};
    if (*m_time < info.size() && info[*m_time].unit) {
      m_time_factor = info[*m_time].unit->factor;
      m_run.time_column->unit = info[*m_time].unit->name;
    }
  }
}

void Reader::take_row(std::string_view line, std::size_t line_no) {
  detail::split_fields(line, m_cand.sep, m_fields);
  if (m_fields.empty()) return;
  const std::string_view first = m_fields.front().text;
  if (!m_fields.front().quoted && (first.rfind('#', 0) == 0 || first.rfind("//", 0) == 0)) {
    m_run.notes.emplace_back(detail::trim(line));
    return;
  }
  // A header repeated inside the table (paginated exports print it on every page): skip it.
  if (!m_header.empty() && m_fields.size() == m_header.size()) {
    bool same = true;
    for (std::size_t i = 0; i < m_fields.size() && same; ++i) same = detail::trim(m_header[i]) == m_fields[i].text;
    if (same) {
      if (++m_repeated_headers == 1)
        warn("repeated_header", "the header is repeated inside the table; skipped", line_no);
      m_header_repeated_at = line_no;
      m_after_repeated_header = true;
      return;
    }
  }
  const std::size_t need = std::max(m_vol, m_sig);
  auto col_name = [&](std::size_t i) {
    const std::string& h = i == m_vol ? m_run.volume_column.header : m_run.signal_column.header;
    return h.empty() ? std::string(i == m_vol ? "volume" : to_string(m_run.signal)) : detail::excerpt(h);
  };
  if (m_fields.size() <= need) {
    bool any_text = false;
    for (const auto& f : m_fields) any_text = any_text || !f.text.empty();
    if (!any_text) return;
    m_pending.push_back({line_no,
                         m_fields.front().column,
                         detail::excerpt(line, 60),
                         fmt::format("row has {} fields; the table has {}", m_fields.size(), m_table_columns),
                         detail::excerpt(detail::trim(line), kMaxNoteChars)});
    return;
  }
  double v = 0.0, s = 0.0;
  int decimals = 0;
  const Field& fv = m_fields[m_vol];
  const Field& fs = m_fields[m_sig];
  const NumberStatus vs = detail::parse_number(fv.text, m_cand.dec, v);
  const NumberStatus ss = detail::parse_number(fs.text, m_cand.dec, s, &decimals);
  if (vs == NumberStatus::not_finite) {
    fail(line_no,
         fv.column,
         fmt::format("'{}' in column '{}' is not a finite number", detail::excerpt(fv.text), col_name(m_vol)),
         "a reading must be a finite number; remove or fix the row");
  }
  if (ss == NumberStatus::not_finite) {
    fail(line_no,
         fs.column,
         fmt::format("'{}' in column '{}' is not a finite number", detail::excerpt(fs.text), col_name(m_sig)),
         "a reading must be a finite number; remove or fix the row");
  }
  if (vs == NumberStatus::not_a_number || ss == NumberStatus::not_a_number) {
    const bool bad_v = vs == NumberStatus::not_a_number;
    const Field& f = bad_v ? fv : fs;
    m_pending.push_back({line_no,
                         f.column,
                         std::string(detail::excerpt(f.text)),
                         "column '" + col_name(bad_v ? m_vol : m_sig) + "'",
                         detail::excerpt(detail::trim(line), kMaxNoteChars)});
    return;
  }
  if (vs == NumberStatus::empty || ss == NumberStatus::empty) {
    if (vs == NumberStatus::empty && ss == NumberStatus::empty) return;
    ++m_empty_cells;
    if (m_empty_cells <= 5) {
      warn("empty_cell",
           fmt::format("empty {} cell; reading skipped",
                       vs == NumberStatus::empty ? "volume" : std::string(to_string(m_run.signal))),
           line_no,
           vs == NumberStatus::empty ? fv.column : fs.column);
    }
    return;
  }
  if (!m_pending.empty()) {
    const Pending& p = m_pending.front();
    if (p.what.rfind("row has", 0) == 0) {
      fail(p.line,
           p.column,
           fmt::format("'{}' inside the table: {}", p.text, p.what),
           "every row of the table must hold a reading; remove the line or start it with '#'");
    }
    fail(p.line,
         p.column,
         fmt::format("'{}' in {} is not a number; expected a number inside the table", p.text, p.what),
         "every row of the table must hold a reading; remove the line or start it with '#'");
  }
  v *= m_vol_factor;
  s *= m_sig_factor;
  if (v < 0) {
    fail(line_no,
         fv.column,
         fmt::format("negative volume {} mL; expected a volume of 0 or more", fv.text),
         "volumes are the titrant added since the start of the run");
  }
  // Back to the start volume after a repeated header, or (rows in order) to the first volume after five
  // readings or more: a second run in the same file, which no sorting can merge with the first.
  const bool after_header = m_after_repeated_header;
  m_after_repeated_header = false;
  if (!m_run.volume_mL.empty() && v < m_run.volume_mL.back() &&
      ((after_header && v <= m_run.volume_mL.front()) ||
       (!m_opt.sort_by_volume && m_run.volume_mL.size() >= 5 && v <= m_run.volume_mL.front()))) {
    fail(line_no,
         fv.column,
         fmt::format("a second run starts here: the volume returns to {:g} mL after {:g} mL on line {}{}; veq "
                     "reads one run per file",
                     v,
                     m_run.volume_mL.back(),
                     m_run.line.back(),
                     after_header ? fmt::format(", below the header repeated on line {}", m_header_repeated_at)
                                  : std::string()),
         "split the file into one file per run");
  }
  if (!m_opt.sort_by_volume && !m_run.volume_mL.empty() && v < m_run.volume_mL.back()) {
    fail(line_no,
         fv.column,
         fmt::format("volume goes backwards: {:g} mL after {:g} mL on line {}; expected volumes that never decrease",
                     v,
                     m_run.volume_mL.back(),
                     m_run.line.back()),
         "a titrator never un-doses; if the rows are merely out of order, pass --sort");
  }
  if (m_run.signal == SignalKind::ph && (s < m_opt.min_pH || s > m_opt.max_pH)) {
    fail(line_no,
         fs.column,
         fmt::format("pH {} is outside {:g} to {:g}", fs.text, m_opt.min_pH, m_opt.max_pH),
         "if this column is a potential, pass --signal mV (or name the column 'E (mV)')");
  }
  if (m_run.signal == SignalKind::mv && std::fabs(s) > m_opt.max_abs_mV) {
    fail(line_no,
         fs.column,
         fmt::format("potential {} mV is outside ±{:g} mV", fs.text, m_opt.max_abs_mV),
         "check the column's unit (mV or V)");
  }
  if (decimals == -1)
    m_max_decimals = -1;
  else if (m_max_decimals != -1)
    m_max_decimals = std::max(m_max_decimals, decimals);
  m_run.volume_mL.push_back(v);
  m_run.signal_values.push_back(s);
  m_run.line.push_back(static_cast<std::uint32_t>(line_no));
  if (m_temp) {
    double t = std::nan("");
    if (*m_temp < m_fields.size() && detail::parse_number(m_fields[*m_temp].text, m_cand.dec, t) == NumberStatus::ok) {
      t = t * m_temp_factor + m_temp_offset;
      if (t < -5 || t > 100) t = std::nan("");
    }
    if (std::isnan(t) && !m_temp_bad_warned) {
      m_temp_bad_warned = true;
      warn("temperature_cell", "temperature cell missing or not a plausible °C value; previous value used", line_no);
    }
    m_run.temperature_C.push_back(t);
  }
  if (m_time) {
    double t = std::nan("");
    if (*m_time < m_fields.size() && detail::parse_number(m_fields[*m_time].text, m_cand.dec, t) == NumberStatus::ok) {
      t *= m_time_factor;
    }
    m_run.time_s.push_back(t);
  }
}

// Fills NaN gaps of an optional column from the nearest earlier (or later) value;
// clears the column when it holds no value at all.
void fill_gaps(std::vector<double>& v) {
  auto first = std::find_if(v.begin(), v.end(), [](double x) { return !std::isnan(x); });
  if (first == v.end()) {
    v.clear();
    return;
  }
  double last = *first;
  for (double& x : v) {
    if (std::isnan(x))
      x = last;
    else
      last = x;
  }
}

void Reader::finish() {
  for (const auto& p : m_pending) {
    const std::string& note = p.line_text.empty() ? p.text : p.line_text;
    m_run.notes.push_back(note);
    if (m_run.notes.size() <= 20) {
      warn("text_after_table", "text after the table kept as a note: '" + detail::excerpt(note, 60) + "'", p.line);
    }
  }
  if (m_empty_cells > 5) {
    warn("empty_cell", fmt::format("{} readings skipped in all for empty cells", m_empty_cells));
  }
  if (m_run.volume_mL.empty()) {
    const char sep = m_cand.sep == detail::kWhitespace ? ' ' : m_cand.sep;
    const std::string example = m_cand.dec == ',' ? fmt::format("12,50{}7,02", sep) : fmt::format("12.50{}7.02", sep);
    fail(m_run.dialect.first_data_line,
         0,
         fmt::format("no readings: the table has no row with both a volume and a signal (columns '{}' and '{}')",
                     detail::excerpt(m_run.volume_column.header),
                     detail::excerpt(m_run.signal_column.header)),
         "expected rows like '" + example +
             "' (volume and pH); if another column holds the signal, pass --columns volume=N,signal=M");
  }
  if (m_opt.sort_by_volume) {
    std::vector<std::size_t> order(m_run.volume_mL.size());
    std::iota(order.begin(), order.end(), 0);
    std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) {
      return m_run.volume_mL[a] < m_run.volume_mL[b];
    });
    if (!std::is_sorted(m_run.volume_mL.begin(), m_run.volume_mL.end())) {
      auto permute = [&](auto& vec) {
        if (vec.empty()) return;
        auto copy = vec;
        for (std::size_t i = 0; i < order.size(); ++i) vec[i] = copy[order[i]];
      };
      permute(m_run.volume_mL);
      permute(m_run.signal_values);
      permute(m_run.line);
      permute(m_run.temperature_C);
      permute(m_run.time_s);
      warn("sorted", "rows were not in volume order and have been sorted (--sort)");
    }
  }
  const auto [mn, mx] = std::minmax_element(m_run.volume_mL.begin(), m_run.volume_mL.end());
  if (*mn == *mx) {
    fail(m_run.dialect.first_data_line,
         m_fields.empty() ? 0 : 1,
         fmt::format("all {} readings have the same volume ({:g} mL); expected a titration over a range of volumes",
                     m_run.volume_mL.size(),
                     *mn),
         "check that the volume column is the titrant volume (or pass --columns volume=N,signal=M)");
  }
  // No burette or dosing unit delivers half a litre: volumes that large, taken as mL, are most often uL.
  constexpr double kMaxPlausible_mL = 500.0;
  if (m_vol_unit_assumed && *mx > kMaxPlausible_mL) {
    warn("volume_unit_doubtful",
         fmt::format("the volumes, taken as mL, reach {:g} mL, more than any burette holds; if they are "
                     "microlitres, pass --volume-unit uL",
                     *mx));
  }
  fill_gaps(m_run.temperature_C);
  fill_gaps(m_run.time_s);
  if (m_max_decimals >= 0) m_run.signal_resolution = std::pow(10.0, -m_max_decimals) * m_sig_factor;
}

Run Reader::read(std::unique_ptr<detail::RawSource> raw) {
  m_run.source = m_source;
  // LineReader destroys its byte source as soon as it has read everything, so it
  // gets a forwarder and the decoder (whose findings are read below) lives here.
  auto decoder_owner = std::make_unique<detail::DecodingSource>(std::move(raw), m_opt.max_file_bytes);
  detail::DecodingSource* decoder = decoder_owner.get();
  struct Forward final : ::io::ByteSourceBase {
    explicit Forward(detail::DecodingSource* d) : target(d) {}
    int read(char* buffer, int size) override { return target->read(buffer, size); }
    detail::DecodingSource* target;
  };
  // Inputs up to whole_file_limit_bytes are decoded whole and split in memory: the streaming
  // LineReader keeps a 48 MiB window, which buys nothing for a small file and
  // costs a batch or a fuzzer dearly. Larger inputs stream through it.
  const bool whole = m_size_hint > 0 && m_size_hint <= m_opt.whole_file_limit_bytes;
  std::unique_ptr<::io::LineReader> lines;
  std::string text;
  std::size_t text_pos = 0, text_line = 0;
  if (whole) {
    char buf[1 << 16];
    while (const int n = decoder->read(buf, static_cast<int>(sizeof buf)))
      text.append(buf, static_cast<std::size_t>(n));
  } else {
    try {
      lines = std::make_unique<::io::LineReader>(m_source, std::make_unique<Forward>(decoder));
    } catch (const std::exception& e) {
      fail(0, 0, std::string("cannot read the file: ") + e.what());
    }
  }
  auto over_limit = [&] {
    if (decoder->over_limit()) {
      fail(0,
           0,
           fmt::format("file is larger than the {} MiB limit", m_opt.max_file_bytes >> 20),
           "pass --max-size to raise the limit if the file really is a titration log");
    }
  };
  if (decoder->looks_binary()) {
    fail(1,
         0,
         "this is a binary file, not a text export (NUL or control bytes found)",
         "export the run as CSV or text from the instrument");
  }
  over_limit();
  // The next line (without its LF), or nullopt at the end; line_no is 1-based.
  auto next = [&](std::size_t& line_no) -> std::optional<std::string_view> {
    if (whole) {
      if (text_pos >= text.size()) return std::nullopt;
      const std::size_t end = text.find('\n', text_pos);
      const std::size_t stop = end == std::string::npos ? text.size() : end;
      std::string_view l(text.data() + text_pos, stop - text_pos);
      text_pos = stop + 1;
      line_no = ++text_line;
      return l;
    }
    try {
      const char* l = lines->next_line();
      if (l == nullptr) return std::nullopt;
      line_no = lines->get_file_line();
      return std::string_view(l);
    } catch (const ::io::error::line_length_limit_exceeded&) {
      fail(lines->get_file_line(), 0, "line is longer than 16 MiB; not a titration log line");
    } catch (const std::exception& e) {
      fail(lines->get_file_line(), 0, std::string("read error: ") + e.what());
    }
  };

  // 1. A sample of lines for sniffing.
  std::vector<std::string> sample;
  std::size_t sample_bytes = 0;
  std::size_t line_no = 0;
  bool eof = false;
  while (sample.size() < kSampleLines && sample_bytes < kSampleBytes) {
    const auto l = next(line_no);
    if (!l) {
      eof = true;
      break;
    }
    const std::string_view sv = *l;
    check_line_length(sv, line_no);
    sample.emplace_back(sv);
    sample_bytes += sv.size() + 1;
  }
  over_limit();
  m_run.dialect.line_ending = decoder->line_endings();
  switch (decoder->encoding()) {
    case detail::Encoding::utf8:
      m_run.dialect.encoding = decoder->latin1_seen() ? "latin-1" : "utf-8";
      break;
    case detail::Encoding::utf8_bom:
      m_run.dialect.encoding = "utf-8-bom";
      break;
    case detail::Encoding::utf16le:
      m_run.dialect.encoding = "utf-16le";
      break;
    case detail::Encoding::utf16be:
      m_run.dialect.encoding = "utf-16be";
      break;
  }
  if (std::all_of(sample.begin(), sample.end(), [](const std::string& s) { return detail::is_blank(s); })) {
    fail(sample.empty() ? 0 : 1, 0, "the file is empty", "expected a pH- or mV-versus-volume table");
  }

  // 2. Dialect.
  const Sniffed sn = sniff(sample);
  if (sn.score <= 0.0) {
    std::vector<Field> scratch;
    for (std::size_t i = 0; i < sample.size(); ++i) {
      if (detail::is_blank(sample[i])) continue;
      Shape s = shape_of(sample[i], {detail::kWhitespace, '.'}, scratch);
      Shape s2 = shape_of(sample[i], {detail::kWhitespace, ','}, scratch);
      if ((s.fields == 1 && s.numeric == 1) || (s2.fields == 1 && s2.numeric == 1)) {
        fail(i + 1,
             1,
             "the table has a single column of numbers; expected two: volume and pH (or mV)",
             "export both the volume and the signal columns");
      }
    }
    // A recognisable header over rows that are not numbers: name the first bad cell.
    for (const Candidate c : kCandidates) {
      for (std::size_t i = 0; i + 1 < sample.size(); ++i) {
        const auto cells = split_header(sample[i], c.sep, 0);
        std::optional<std::size_t> vol, sig;
        for (std::size_t k = 0; k < cells.size(); ++k) {
          const auto q = detail::classify_header(cells[k]).quantity;
          if (q == Quantity::volume && !vol) vol = k;
          if ((q == Quantity::ph || q == Quantity::potential) && !sig) sig = k;
        }
        if (!vol || !sig) continue;
        std::size_t j = i + 1;
        while (j < sample.size() && detail::is_blank(sample[j])) ++j;
        if (j >= sample.size()) continue;
        detail::split_fields(sample[j], c.sep, scratch);
        for (std::size_t k : {*vol, *sig}) {
          double v = 0;
          if (k < scratch.size() && detail::parse_number(scratch[k].text, c.dec, v) != NumberStatus::ok) {
            fail(j + 1,
                 scratch[k].column,
                 fmt::format("'{}' in column '{}' is not a number; expected a number under the header on line {}",
                             detail::excerpt(scratch[k].text),
                             detail::excerpt(cells[k]),
                             i + 1),
                 "cells must hold plain numbers (no units or text); units belong in the header");
          }
        }
      }
    }
    fail(eof ? 1 : 0,
         0,
         eof ? "no table of numbers found; expected rows like '12.50;7.02' (volume and pH)"
             : fmt::format("no table of numbers found in the first {} lines", sample.size()),
         "export the run as text with one reading per row");
  }
  m_cand = sn.cand;
  m_table_columns = sn.columns;
  m_run.dialect.separator = m_cand.sep;
  m_run.dialect.decimal = m_cand.dec;

  // 3. Where the table starts, its header, and the metadata before it.
  std::vector<Field> scratch;
  // A reading row: numeric, with the table's columns, counting empty cells at its end (a first row whose
  // derivative cell is still empty, "0.00,2.000,", has its three columns).
  auto row_ok = [&](std::size_t i) {
    if (detail::is_blank(sample[i])) return false;
    const Shape s = shape_of(sample[i], m_cand, scratch);
    if (!s.numeric_row) return false;
    if (s.fields >= m_table_columns) return true;
    if (m_cand.sep == detail::kWhitespace) return false;
    const std::size_t cells = 1 + static_cast<std::size_t>(std::count(sample[i].begin(), sample[i].end(), m_cand.sep));
    return cells >= m_table_columns && sample[i].find('"') == std::string::npos;
  };
  std::size_t start = sample.size();
  for (std::size_t i = 0; i < sample.size() && start == sample.size(); ++i) {
    if (!row_ok(i)) continue;
    // A numeric line starts the table when most of the next few lines are
    // readings too (a lone numeric metadata line does not).
    std::size_t checked = 0, good = 0;
    for (std::size_t j = i + 1; j < sample.size() && checked < 3; ++j) {
      if (detail::is_blank(sample[j])) continue;
      ++checked;
      good += row_ok(j) ? 1 : 0;
    }
    if (2 * good >= checked) start = i;
  }
  if (start == sample.size()) {
    for (std::size_t i = 0; i < sample.size(); ++i) {
      if (row_ok(i)) {
        start = i;
        break;
      }
    }
  }
  m_run.dialect.first_data_line = start + 1;
  std::vector<std::string> header;
  std::size_t header_line = 0;
  std::size_t preamble_end = start;  // lines [0, preamble_end) are metadata
  {
    std::size_t h = start;
    while (h > 0 && detail::is_blank(sample[h - 1])) --h;
    if (h > 0) {
      const std::size_t hi = h - 1;
      auto cells = split_header(sample[hi], m_cand.sep, m_table_columns);
      bool recognised = false;
      for (const auto& c : cells) {
        const auto q = detail::classify_header(c).quantity;
        recognised = recognised || (q != Quantity::none);
      }
      if (is_units_row(cells) && hi > 0) {
        // Two header lines: names, then units.
        std::size_t ni = hi;
        while (ni > 0 && detail::is_blank(sample[ni - 1])) --ni;
        if (ni > 0) {
          auto names = split_header(sample[ni - 1], m_cand.sep, m_table_columns);
          if (names.size() >= 2 && !row_ok(ni - 1)) {
            for (std::size_t k = 0; k < names.size(); ++k) {
              std::string u = k < cells.size() ? std::string(detail::trim(cells[k])) : std::string();
              if (!u.empty() && u.front() != '(' && u.front() != '[') u = "(" + u + ")";
              if (u.size() >= 2) {
                const std::string_view inner = detail::trim(std::string_view(u).substr(1, u.size() - 2));
                if (inner.empty() || inner == "-" || inner == "--") u.clear();  // no unit: [-], [ ], ()
              }
              if (!u.empty()) names[k] += " " + u;
            }
            cells = names;
            recognised = true;
            header_line = ni;
            preamble_end = ni - 1;
          }
        }
      }
      if (header_line == 0 && recognised && cells.size() >= 2 && !row_ok(hi)) {
        header_line = hi + 1;
        preamble_end = hi;
      }
      if (header_line != 0) header = cells;
    }
  }
  m_run.dialect.header_line = header_line;
  choose_columns(header, header_line);
  m_header = header;

  std::vector<detail::MetaEntry> meta;
  for (std::size_t i = 0; i < preamble_end; ++i) {
    if (detail::is_blank(sample[i])) continue;
    if (auto e = detail::parse_metadata_line(sample[i], i + 1)) {
      m_run.metadata.emplace_back(e->key, e->value);
      meta.push_back(std::move(*e));
    } else {
      m_run.notes.emplace_back(detail::trim(sample[i]));
    }
  }
  m_run.facts = detail::facts_from_metadata(meta, m_source, m_run.warnings);

  // 4. The readings: the rest of the sample, then the rest of the file, streamed.
  // Reserving from the file size avoids the transient doubling of vector growth.
  if (m_size_hint > 0 && start < sample.size()) {
    std::size_t table_bytes = 0, table_lines = 0;
    for (std::size_t i = start; i < sample.size(); ++i) table_bytes += sample[i].size() + 1, ++table_lines;
    const double per_line =
        static_cast<double>(table_bytes) / static_cast<double>(std::max<std::size_t>(table_lines, 1));
    const auto estimate =
        static_cast<std::size_t>(static_cast<double>(m_size_hint) / std::max(per_line, 4.0) * 1.02) + 16;
    const std::size_t rows = std::min<std::size_t>(estimate, m_opt.max_file_bytes / 4 + 16);
    m_run.volume_mL.reserve(rows);
    m_run.signal_values.reserve(rows);
    m_run.line.reserve(rows);
    if (m_temp) m_run.temperature_C.reserve(rows);
    if (m_time) m_run.time_s.reserve(rows);
  }
  for (std::size_t i = start; i < sample.size(); ++i) take_row(sample[i], i + 1);
  sample.clear();
  sample.shrink_to_fit();
  if (!eof) {
    while (const auto l = next(line_no)) {
      const std::string_view sv = *l;
      check_line_length(sv, line_no);
      take_row(sv, line_no);
      if ((line_no & 0xFFFF) == 0) over_limit();
    }
  }
  over_limit();
  finish();

  if (m_run.facts.sample_id.empty()) {
    m_run.facts.sample_id = std::filesystem::path(m_source).stem().string();
  }
  if (!m_run.facts.temperature_C && !m_run.temperature_C.empty()) {
    double sum = 0.0;
    for (double t : m_run.temperature_C) sum += t;
    m_run.facts.temperature_C = sum / static_cast<double>(m_run.temperature_C.size());
  }
  return std::move(m_run);
}

}  // namespace

std::vector<std::string> IngestOptions::validate() const {
  std::vector<std::string> problems;
  if (max_file_bytes == 0) problems.push_back("max_file_bytes = 0: must be positive");
  if (max_line_bytes < 64) problems.push_back(fmt::format("max_line_bytes = {}: must be at least 64", max_line_bytes));
  if (!(min_pH < max_pH))
    problems.push_back(fmt::format("min_pH = {:g}, max_pH = {:g}: min must be below max", min_pH, max_pH));
  if (!(max_abs_mV > 0)) problems.push_back(fmt::format("max_abs_mV = {:g}: must be positive", max_abs_mV));
  if (columns.volume && columns.signal && *columns.volume == *columns.signal) {
    problems.push_back("columns: volume and signal must be different columns");
  }
  return problems;
}

Run read_run(const std::filesystem::path& path, const IngestOptions& options) {
  const std::string name = path.string();
  std::error_code ec;
  const auto status = std::filesystem::status(path, ec);
  if (ec || !std::filesystem::exists(status)) {
    throw InputError({name, 0, 0}, "cannot open the file: it does not exist", "check the path");
  }
  if (std::filesystem::is_directory(status)) {
    throw InputError({name, 0, 0}, "this is a folder, not a file", "use 'veq batch' for a folder of runs");
  }
  if (std::filesystem::is_regular_file(status)) {
    const auto size = std::filesystem::file_size(path, ec);
    if (!ec && size > options.max_file_bytes) {
      throw InputError({name, 0, 0},
                       fmt::format("file is {:.1f} MiB; the limit is {} MiB",
                                   static_cast<double>(size) / 1048576.0,
                                   options.max_file_bytes >> 20),
                       "pass --max-size to raise the limit if the file really is a titration log");
    }
  }
  std::FILE* f = std::fopen(name.c_str(), "rb");
  if (f == nullptr) {
    throw InputError({name, 0, 0}, std::string("cannot open the file: ") + std::strerror(errno));
  }
  std::error_code size_ec;
  const auto size = std::filesystem::is_regular_file(status) ? std::filesystem::file_size(path, size_ec) : 0;
  Reader reader(name, options, size_ec ? 0 : size);
  return reader.read(std::make_unique<detail::FileSource>(f));
}

Run parse_run(std::string_view bytes, const std::string& source_name, const IngestOptions& options) {
  if (bytes.size() > options.max_file_bytes) {
    throw InputError({source_name, 0, 0},
                     fmt::format("file is {:.1f} MiB; the limit is {} MiB",
                                 static_cast<double>(bytes.size()) / 1048576.0,
                                 options.max_file_bytes >> 20));
  }
  Reader reader(source_name, options, bytes.size());
  return reader.read(std::make_unique<detail::MemorySource>(bytes));
}

Expected<Run> try_read_run(const std::filesystem::path& path, const IngestOptions& options) {
  try {
    return read_run(path, options);
  } catch (const InputError& e) {
    return e;
  }
}

Expected<Run> try_parse_run(std::string_view bytes, const std::string& source_name, const IngestOptions& options) {
  try {
    return parse_run(bytes, source_name, options);
  } catch (const InputError& e) {
    return e;
  }
}

ColumnOverrides parse_column_overrides(std::string_view spec) {
  ColumnOverrides out;
  auto bad = [&](const std::string& why) {
    throw InputError({"--columns", 0, 0},
                     "'" + detail::excerpt(spec) + "': " + why,
                     "expected e.g. --columns volume=2,signal=4 (1-based; also temperature=N, time=N)");
  };
  std::string_view rest = spec;
  while (!rest.empty()) {
    const std::size_t comma = rest.find(',');
    std::string_view item = detail::trim(rest.substr(0, comma));
    rest = comma == std::string_view::npos ? std::string_view{} : rest.substr(comma + 1);
    if (item.empty()) continue;
    const std::size_t eq = item.find('=');
    if (eq == std::string_view::npos) bad("missing '='");
    const std::string key = detail::normalize_label(detail::trim(item.substr(0, eq)));
    double v = 0.0;
    if (detail::parse_number(item.substr(eq + 1), '.', v) != NumberStatus::ok || v < 1 || v != std::floor(v) ||
        v > 10000) {
      bad("column numbers are whole numbers from 1");
    }
    const auto n = static_cast<std::size_t>(v);
    if (key == "volume" || key == "v")
      out.volume = n;
    else if (key == "signal" || key == "ph" || key == "mv" || key == "e")
      out.signal = n;
    else if (key == "temperature" || key == "temp" || key == "t")
      out.temperature = n;
    else if (key == "time")
      out.time = n;
    else
      bad("unknown column name '" + key + "'");
  }
  if (!out.volume && !out.signal && !out.temperature && !out.time) bad("no column given");
  return out;
}

}  // namespace veq::ingest
