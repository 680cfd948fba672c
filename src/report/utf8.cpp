// SPDX-License-Identifier: MIT
// UTF-8 validation for report text (RFC 3629 sequences; XML 1.0 "Char" production).
#include "report/utf8.hpp"

#include <cstdint>

namespace veq::report::detail {

std::string valid_utf8(std::string_view text) {
  static constexpr std::string_view kReplacement = "\xEF\xBF\xBD";  // U+FFFD
  std::string out;
  out.reserve(text.size());
  const auto* s = reinterpret_cast<const unsigned char*>(text.data());
  const std::size_t n = text.size();
  for (std::size_t i = 0; i < n;) {
    const unsigned char c = s[i];
    if (c < 0x80) {
      if ((c < 0x20 && c != '\t' && c != '\n' && c != '\r') || c == 0x7F)
        out += kReplacement;
      else
        out += static_cast<char>(c);
      ++i;
      continue;
    }
    // Length from the lead byte, then continuation bytes, then the code
    // point's range (RFC 3629 §4).
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if (c >= 0xC2 && c <= 0xDF)
      len = 2, cp = c & 0x1Fu;
    else if (c >= 0xE0 && c <= 0xEF)
      len = 3, cp = c & 0x0Fu;
    else if (c >= 0xF0 && c <= 0xF4)
      len = 4, cp = c & 0x07u;
    bool ok = len > 0 && i + len <= n;
    for (std::size_t k = 1; ok && k < len; ++k) {
      ok = (s[i + k] & 0xC0u) == 0x80u;
      cp = (cp << 6) | (s[i + k] & 0x3Fu);
    }
    if (ok) {
      ok = !(len == 3 && cp < 0x800) && !(len == 4 && (cp < 0x10000 || cp > 0x10FFFF)) &&
           !(cp >= 0xD800 && cp <= 0xDFFF) && !(cp >= 0x80 && cp <= 0x9F) && cp != 0xFFFE && cp != 0xFFFF;
    }
    if (ok) {
      out.append(text.substr(i, len));
      i += len;
    } else {
      out += kReplacement;
      ++i;
    }
  }
  return out;
}

}  // namespace veq::report::detail
