// SPDX-License-Identifier: MIT
// Streaming decoder for exported logs (UTF-8, UTF-8 BOM, UTF-16 LE/BE, Latin-1 bytes).
#include "ingest/decode.hpp"

#include <algorithm>
#include <array>
#include <cerrno>
#include <cstring>
#include <stdexcept>

namespace veq::ingest::detail {
namespace {

constexpr std::size_t kChunk = 1 << 16;

}  // namespace

FileSource::~FileSource() {
  if (m_file != nullptr) std::fclose(m_file);
}

std::size_t FileSource::read(char* buffer, std::size_t size) {
  const std::size_t n = std::fread(buffer, 1, size, m_file);
  if (n < size && std::ferror(m_file)) throw std::runtime_error(std::strerror(errno));
  return n;
}

std::size_t MemorySource::read(char* buffer, std::size_t size) {
  const std::size_t n = std::min(size, m_data.size());
  std::memcpy(buffer, m_data.data(), n);
  m_data.remove_prefix(n);
  return n;
}

DecodingSource::DecodingSource(std::unique_ptr<RawSource> raw, std::uint64_t max_raw_bytes)
    : m_raw(std::move(raw)), m_max_raw(max_raw_bytes) {}

std::string DecodingSource::line_endings() const {
  const int kinds = (m_lf > 0) + (m_crlf > 0) + (m_cr > 0);
  if (kinds == 0) return "none";
  if (kinds > 1) return "mixed";
  if (m_crlf > 0) return "crlf";
  if (m_cr > 0) return "cr";
  return "lf";
}

void DecodingSource::start(std::string_view first) {
  m_started = true;
  auto at = [&](std::size_t i) { return static_cast<unsigned char>(first[i]); };
  if (first.size() >= 3 && at(0) == 0xEF && at(1) == 0xBB && at(2) == 0xBF) {
    m_encoding = Encoding::utf8_bom;
  } else if (first.size() >= 2 && at(0) == 0xFF && at(1) == 0xFE) {
    m_encoding = Encoding::utf16le;
  } else if (first.size() >= 2 && at(0) == 0xFE && at(1) == 0xFF) {
    m_encoding = Encoding::utf16be;
  } else {
    // UTF-16 without a BOM shows as NULs in every other byte of ASCII text.
    const std::size_t n = std::min<std::size_t>(first.size() & ~std::size_t{1}, 1024);
    std::size_t even_nul = 0, odd_nul = 0;
    for (std::size_t i = 0; i < n; ++i) {
      if (first[i] == '\0') ++((i % 2 == 0) ? even_nul : odd_nul);
    }
    const std::size_t pairs = n / 2;
    if (pairs >= 4 && odd_nul * 10 >= pairs * 9 && even_nul * 10 < pairs) {
      m_encoding = Encoding::utf16le;
    } else if (pairs >= 4 && even_nul * 10 >= pairs * 9 && odd_nul * 10 < pairs) {
      m_encoding = Encoding::utf16be;
    }
  }
  if (m_encoding == Encoding::utf8 || m_encoding == Encoding::utf8_bom) {
    // A text export has no NULs and almost no control characters.
    std::size_t control = 0, nul = 0;
    for (unsigned char c : first.substr(0, 8192)) {
      if (c == 0)
        ++nul;
      else if (c < 0x20 && c != '\t' && c != '\n' && c != '\r' && c != '\f' && c != '\v')
        ++control;
    }
    const std::size_t sample = std::min<std::size_t>(first.size(), 8192);
    m_looks_binary = nul > 0 || control * 20 > sample;
  }
}

void DecodingSource::flush_pending_cr() {
  if (!m_pending_cr) return;
  m_pending_cr = false;
  ++m_cr;
  m_out.push_back('\n');
}

void DecodingSource::emit_char(char c) {
  if (m_pending_cr) {
    if (c == '\n') {
      m_pending_cr = false;
      ++m_crlf;
      m_out.push_back('\n');
      return;
    }
    flush_pending_cr();
  }
  if (c == '\r') {
    m_pending_cr = true;
    return;
  }
  if (c == '\n') ++m_lf;
  m_out.push_back(c);
}

void DecodingSource::emit_codepoint(std::uint32_t cp) {
  if (cp == 0) cp = 0xFFFD;
  if (cp < 0x80) {
    emit_char(static_cast<char>(cp));
    return;
  }
  flush_pending_cr();
  if (cp < 0x800) {
    m_out.push_back(static_cast<char>(0xC0 | (cp >> 6)));
    m_out.push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  } else if (cp < 0x10000) {
    m_out.push_back(static_cast<char>(0xE0 | (cp >> 12)));
    m_out.push_back(static_cast<char>(0x80 | ((cp >> 6) & 0x3F)));
    m_out.push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  } else {
    m_out.push_back(static_cast<char>(0xF0 | (cp >> 18)));
    m_out.push_back(static_cast<char>(0x80 | ((cp >> 12) & 0x3F)));
    m_out.push_back(static_cast<char>(0x80 | ((cp >> 6) & 0x3F)));
    m_out.push_back(static_cast<char>(0x80 | (cp & 0x3F)));
  }
}

namespace {

// Windows-1252 in 0x80-0x9F, where Latin-1 has C1 control codes no export means (the code page's table,
// from memory: the euro sign, typographic quotes and dashes, and a few letters); its 5 unassigned bytes
// stay as they are.
std::uint32_t windows_1252(unsigned char c) {
  static constexpr std::array<std::uint16_t, 32> kTable = {
      0x20AC, 0x0081, 0x201A, 0x0192, 0x201E, 0x2026, 0x2020, 0x2021, 0x02C6, 0x2030, 0x0160,
      0x2039, 0x0152, 0x008D, 0x017D, 0x008F, 0x0090, 0x2018, 0x2019, 0x201C, 0x201D, 0x2022,
      0x2013, 0x2014, 0x02DC, 0x2122, 0x0161, 0x203A, 0x0153, 0x009D, 0x017E, 0x0178};
  return kTable[static_cast<std::size_t>(c - 0x80)];
}

}  // namespace

void DecodingSource::decode_utf8(std::string_view in, bool last) {
  std::size_t i = 0;
  const std::size_t n = in.size();
  while (i < n) {
    const auto c = static_cast<unsigned char>(in[i]);
    if (c < 0x80) {
      if (m_pending_cr || c == '\r' || c == 0) {
        emit_codepoint(c);
        ++i;
        continue;
      }
      // A run of plain ASCII (no CR, no NUL) goes out as it is, its line feeds counted: what emit_codepoint
      // does byte by byte.
      std::size_t j = i;
      while (j < n) {
        const auto d = static_cast<unsigned char>(in[j]);
        if (d >= 0x80 || d == '\r' || d == 0) break;
        m_lf += d == '\n';
        ++j;
      }
      m_out.append(in.data() + i, j - i);
      i = j;
      continue;
    }
    std::size_t len = 0;
    std::uint32_t cp = 0;
    if (c >= 0xC2 && c <= 0xDF)
      len = 2, cp = c & 0x1F;
    else if (c >= 0xE0 && c <= 0xEF)
      len = 3, cp = c & 0x0F;
    else if (c >= 0xF0 && c <= 0xF4)
      len = 4, cp = c & 0x07;
    if (len > 0 && i + len > n && !last) {
      m_carry.assign(in.substr(i));  // sequence split across chunks
      return;
    }
    bool valid = len > 0 && i + len <= n;
    for (std::size_t k = 1; valid && k < len; ++k) {
      const auto cc = static_cast<unsigned char>(in[i + k]);
      if ((cc & 0xC0) != 0x80)
        valid = false;
      else
        cp = (cp << 6) | (cc & 0x3F);
    }
    if (valid && ((len == 3 && (cp < 0x800 || (cp >= 0xD800 && cp <= 0xDFFF))) ||
                  (len == 4 && (cp < 0x10000 || cp > 0x10FFFF)))) {
      valid = false;
    }
    if (valid) {
      emit_codepoint(cp);
      i += len;
    } else {
      m_latin1_seen = true;  // not UTF-8: read this byte as Latin-1, or as Windows-1252 in 0x80-0x9F
      emit_codepoint(c >= 0x80 && c <= 0x9F ? windows_1252(c) : c);
      ++i;
    }
  }
}

void DecodingSource::decode_utf16(std::string_view in, bool last) {
  const bool le = m_encoding == Encoding::utf16le;
  std::size_t i = 0;
  for (; i + 1 < in.size(); i += 2) {
    const auto b0 = static_cast<unsigned char>(in[i]);
    const auto b1 = static_cast<unsigned char>(in[i + 1]);
    const std::uint32_t unit = le ? (b0 | (b1 << 8)) : ((b0 << 8) | b1);
    if (unit >= 0xD800 && unit <= 0xDBFF) {
      if (m_high_surrogate != 0) emit_codepoint(0xFFFD);
      m_high_surrogate = unit;
      continue;
    }
    if (unit >= 0xDC00 && unit <= 0xDFFF) {
      if (m_high_surrogate != 0) {
        emit_codepoint(0x10000 + ((m_high_surrogate - 0xD800) << 10) + (unit - 0xDC00));
        m_high_surrogate = 0;
      } else {
        emit_codepoint(0xFFFD);
      }
      continue;
    }
    if (m_high_surrogate != 0) {
      emit_codepoint(0xFFFD);
      m_high_surrogate = 0;
    }
    if (unit == 0xFEFF) continue;  // BOM or zero-width no-break space
    emit_codepoint(unit);
  }
  if (i < in.size()) {
    if (last)
      emit_codepoint(0xFFFD);
    else
      m_carry.assign(in.substr(i));
  }
}

bool DecodingSource::refill() {
  if (m_raw_eof) return false;
  std::string raw = std::move(m_carry);
  m_carry.clear();
  const std::size_t carried = raw.size();
  // A chunk, or what is left and one byte more (a short read then says the end, as for a full chunk;
  // a run of a few kB is not read into 64 KiB zeroed first).
  std::size_t want = kChunk;
  if (const auto left = m_raw->remaining()) want = std::min(kChunk, *left + 1);
  raw.resize(carried + want);
  std::size_t got = 0;
  if (!m_over_limit) {
    // Read a full chunk: fread on a pipe may return short.
    while (got < want) {
      const std::size_t n = m_raw->read(raw.data() + carried + got, want - got);
      if (n == 0) break;
      got += n;
    }
  }
  raw.resize(carried + got);
  m_raw_total += got;
  if (m_raw_total > m_max_raw) {
    m_over_limit = true;
    m_raw_eof = true;
    return false;
  }
  const bool last = got < want;
  if (last) m_raw_eof = true;
  std::string_view view(raw);
  if (!m_started) {
    start(view);
    if (m_encoding == Encoding::utf8_bom)
      view.remove_prefix(3);
    else if (view.size() >= 2 && (m_encoding == Encoding::utf16le || m_encoding == Encoding::utf16be) &&
             ((static_cast<unsigned char>(view[0]) == 0xFF && static_cast<unsigned char>(view[1]) == 0xFE) ||
              (static_cast<unsigned char>(view[0]) == 0xFE && static_cast<unsigned char>(view[1]) == 0xFF))) {
      view.remove_prefix(2);
    }
  }
  if (m_encoding == Encoding::utf16le || m_encoding == Encoding::utf16be)
    decode_utf16(view, last);
  else
    decode_utf8(view, last);
  if (last) flush_pending_cr();
  return true;
}

int DecodingSource::read(char* buffer, int size) {
  int written = 0;
  while (written < size) {
    if (m_out_pos >= m_out.size()) {
      m_out.clear();
      m_out_pos = 0;
      if (!refill() && m_out.empty()) break;
      continue;
    }
    const std::size_t n = std::min<std::size_t>(static_cast<std::size_t>(size - written), m_out.size() - m_out_pos);
    std::memcpy(buffer + written, m_out.data() + m_out_pos, n);
    m_out_pos += n;
    written += static_cast<int>(n);
  }
  return written;
}

}  // namespace veq::ingest::detail
