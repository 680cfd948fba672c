// SPDX-License-Identifier: MIT
// A strict XML 1.0 well-formedness checker for the tests (the report's HTML is polyglot: also XML).
//
// Checks the well-formedness constraints of XML 1.0 (W3C Recommendation, fifth
// edition, 2008) that matter for generated documents: one root element;
// properly nested, matching start and end tags; names by the Name production
// (ASCII subset); attribute values quoted, without '<', unique per element;
// '&' only as a predefined entity (&amp; &lt; &gt; &quot; &apos;) or a
// character reference to a legal Char; no "]]>" in text; comments without
// "--"; well-formed UTF-8 holding only legal Chars (§2.2). A document type
// declaration is accepted only in its HTML5 form <!DOCTYPE html>. Anything
// else (other declarations, processing instructions other than an XML
// declaration) is rejected, so the checker errs on the strict side.
#pragma once

#include <cstdint>
#include <map>
#include <set>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

namespace veq::test {

struct XmlCheck {
  bool ok = false;
  std::string error;                                           // what broke, with the byte offset
  std::set<std::string> elements;                              // every element name seen
  std::set<std::string> attributes;                            // every attribute name seen
  std::vector<std::pair<std::size_t, std::size_t>> svg_spans;  // [begin, end) of each outermost <svg> element
  std::string root;                                            // name of the root element
  std::map<std::string, std::string> root_attributes;
};

class XmlChecker {
 public:
  explicit XmlChecker(std::string_view doc) : m_s(doc) {}

  XmlCheck run() {
    XmlCheck r;
    m_r = &r;
    if (!valid_chars()) return r;
    std::size_t i = 0;
    if (m_s.substr(0, 5) == "<?xml") {
      const std::size_t e = m_s.find("?>");
      if (e == std::string_view::npos) return fail(0, "unterminated XML declaration");
      i = e + 2;
    }
    bool seen_root = false, seen_doctype = false;
    while (i < m_s.size()) {
      const char c = m_s[i];
      if (is_space(c)) {
        ++i;
        continue;
      }
      if (c != '<') return fail(i, "text outside the root element");
      if (m_s.substr(i, 4) == "<!--") {
        if (!comment(i)) return r;
        continue;
      }
      if (m_s.substr(i, 9) == "<!DOCTYPE") {
        if (seen_root || seen_doctype) return fail(i, "misplaced DOCTYPE");
        const std::size_t e = m_s.find('>', i);
        if (e == std::string_view::npos || m_s.substr(i, e + 1 - i) != "<!DOCTYPE html>") {
          return fail(i, "only <!DOCTYPE html> is accepted");
        }
        seen_doctype = true;
        i = e + 1;
        continue;
      }
      if (seen_root) return fail(i, "a second root element");
      if (!element(i, 0)) return r;
      seen_root = true;
    }
    if (!seen_root) return fail(i, "no root element");
    r.ok = true;
    return r;
  }

 private:
  std::string_view m_s;
  XmlCheck* m_r = nullptr;
  std::size_t m_svg_depth = 0;

  static bool is_space(char c) { return c == ' ' || c == '\t' || c == '\n' || c == '\r'; }
  static bool name_start(char c) { return (c >= 'A' && c <= 'Z') || (c >= 'a' && c <= 'z') || c == '_' || c == ':'; }
  static bool name_char(char c) { return name_start(c) || (c >= '0' && c <= '9') || c == '-' || c == '.'; }

  XmlCheck fail(std::size_t at, const std::string& what) {
    m_r->ok = false;
    m_r->error = what + " at byte " + std::to_string(at) + ": '" + std::string(m_s.substr(at, 40)) + "'";
    return *m_r;
  }
  bool failb(std::size_t at, const std::string& what) {
    (void)fail(at, what);
    return false;
  }

  static bool legal_char(std::uint32_t cp) {
    return cp == 0x9 || cp == 0xA || cp == 0xD || (cp >= 0x20 && cp <= 0xD7FF) || (cp >= 0xE000 && cp <= 0xFFFD) ||
           (cp >= 0x10000 && cp <= 0x10FFFF);
  }

  bool valid_chars() {
    const auto* s = reinterpret_cast<const unsigned char*>(m_s.data());
    for (std::size_t i = 0; i < m_s.size();) {
      const unsigned char c = s[i];
      std::size_t len = c < 0x80                   ? 1
                        : (c >= 0xC2 && c <= 0xDF) ? 2
                        : (c >= 0xE0 && c <= 0xEF) ? 3
                        : (c >= 0xF0 && c <= 0xF4) ? 4
                                                   : 0;
      if (len == 0 || i + len > m_s.size()) return failb(i, "invalid UTF-8");
      std::uint32_t cp = len == 1 ? c : len == 2 ? (c & 0x1Fu) : len == 3 ? (c & 0x0Fu) : (c & 0x07u);
      for (std::size_t k = 1; k < len; ++k) {
        if ((s[i + k] & 0xC0u) != 0x80u) return failb(i, "invalid UTF-8");
        cp = (cp << 6) | (s[i + k] & 0x3Fu);
      }
      if ((len == 3 && cp < 0x800) || (len == 4 && cp < 0x10000)) return failb(i, "overlong UTF-8");
      if (!legal_char(cp)) return failb(i, "character not allowed in XML");
      i += len;
    }
    return true;
  }

  bool comment(std::size_t& i) {
    const std::size_t e = m_s.find("-->", i + 4);
    if (e == std::string_view::npos) return failb(i, "unterminated comment");
    if (m_s.substr(i + 4, e - i - 4).find("--") != std::string_view::npos) return failb(i, "'--' inside a comment");
    i = e + 3;
    return true;
  }

  bool reference(std::size_t& i) {
    const std::size_t e = m_s.find(';', i);
    if (e == std::string_view::npos || e - i > 12) return failb(i, "'&' that is not a reference");
    const std::string_view ref = m_s.substr(i + 1, e - i - 1);
    if (ref == "amp" || ref == "lt" || ref == "gt" || ref == "quot" || ref == "apos") {
      i = e + 1;
      return true;
    }
    if (ref.size() >= 2 && ref[0] == '#') {
      const bool hex = ref[1] == 'x';
      const std::string_view digits = ref.substr(hex ? 2 : 1);
      if (digits.empty()) return failb(i, "empty character reference");
      std::uint32_t cp = 0;
      for (const char d : digits) {
        int v = -1;
        if (d >= '0' && d <= '9')
          v = d - '0';
        else if (hex && d >= 'a' && d <= 'f')
          v = d - 'a' + 10;
        else if (hex && d >= 'A' && d <= 'F')
          v = d - 'A' + 10;
        if (v < 0 || cp > 0x10FFFF) return failb(i, "bad character reference");
        cp = cp * (hex ? 16u : 10u) + static_cast<std::uint32_t>(v);
      }
      if (!legal_char(cp)) return failb(i, "character reference to an illegal character");
      i = e + 1;
      return true;
    }
    return failb(i, "unknown entity '&" + std::string(ref) + ";' (only the five XML entities are defined)");
  }

  bool name(std::size_t& i, std::string& out) {
    if (i >= m_s.size() || !name_start(m_s[i])) return failb(i, "expected a name");
    const std::size_t b = i;
    while (i < m_s.size() && name_char(m_s[i])) ++i;
    out = std::string(m_s.substr(b, i - b));
    return true;
  }

  // An element starting at m_s[i] == '<'; on success i is just past its end.
  bool element(std::size_t& i, int depth) {
    if (depth > 200) return failb(i, "nesting too deep");
    const std::size_t begin = i;
    ++i;
    std::string tag;
    if (!name(i, tag)) return false;
    m_r->elements.insert(tag);
    if (depth == 0) m_r->root = tag;
    std::set<std::string> seen;
    for (;;) {
      const std::size_t before = i;
      while (i < m_s.size() && is_space(m_s[i])) ++i;
      if (i >= m_s.size()) return failb(begin, "unterminated start tag");
      if (m_s[i] == '>' || m_s.substr(i, 2) == "/>") break;
      if (i == before) return failb(i, "attributes must be separated by white space");
      std::string attr;
      if (!name(i, attr)) return false;
      if (!seen.insert(attr).second) return failb(i, "duplicate attribute '" + attr + "'");
      m_r->attributes.insert(attr);
      while (i < m_s.size() && is_space(m_s[i])) ++i;
      if (i >= m_s.size() || m_s[i] != '=') return failb(i, "attribute without '='");
      ++i;
      while (i < m_s.size() && is_space(m_s[i])) ++i;
      if (i >= m_s.size() || (m_s[i] != '"' && m_s[i] != '\'')) return failb(i, "unquoted attribute value");
      const char q = m_s[i++];
      const std::size_t vb = i;
      while (i < m_s.size() && m_s[i] != q) {
        if (m_s[i] == '<') return failb(i, "'<' in an attribute value");
        if (m_s[i] == '&') {
          if (!reference(i)) return false;
          continue;
        }
        ++i;
      }
      if (i >= m_s.size()) return failb(vb, "unterminated attribute value");
      if (depth == 0) m_r->root_attributes[attr] = std::string(m_s.substr(vb, i - vb));
      ++i;
    }
    const bool svg_outer = tag == "svg" && m_svg_depth == 0;
    if (m_s.substr(i, 2) == "/>") {
      i += 2;
      if (svg_outer) m_r->svg_spans.emplace_back(begin, i);
      return true;
    }
    ++i;  // '>'
    if (tag == "svg") ++m_svg_depth;
    for (;;) {
      if (i >= m_s.size()) return failb(begin, "element <" + tag + "> is never closed");
      const char c = m_s[i];
      if (c == '&') {
        if (!reference(i)) return false;
        continue;
      }
      if (c == ']' && m_s.substr(i, 3) == "]]>") return failb(i, "']]>' in text");
      if (c != '<') {
        ++i;
        continue;
      }
      if (m_s.substr(i, 4) == "<!--") {
        if (!comment(i)) return false;
        continue;
      }
      if (m_s.substr(i, 9) == "<![CDATA[") {
        const std::size_t e = m_s.find("]]>", i);
        if (e == std::string_view::npos) return failb(i, "unterminated CDATA section");
        i = e + 3;
        continue;
      }
      if (m_s.substr(i, 2) == "</") {
        i += 2;
        std::string end_tag;
        if (!name(i, end_tag)) return false;
        if (end_tag != tag) return failb(i, "</" + end_tag + "> closes <" + tag + ">");
        while (i < m_s.size() && is_space(m_s[i])) ++i;
        if (i >= m_s.size() || m_s[i] != '>') return failb(i, "malformed end tag");
        ++i;
        if (tag == "svg") --m_svg_depth;
        if (svg_outer) m_r->svg_spans.emplace_back(begin, i);
        return true;
      }
      if (m_s.substr(i, 2) == "<!" || m_s.substr(i, 2) == "<?")
        return failb(i, "declaration or instruction inside content");
      if (!element(i, depth + 1)) return false;
    }
  }
};

inline XmlCheck check_xml(std::string_view doc) {
  return XmlChecker(doc).run();
}

}  // namespace veq::test
