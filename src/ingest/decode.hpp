// SPDX-License-Identifier: MIT
// Streaming decoder: raw bytes in any supported encoding -> UTF-8 with LF line ends.
#pragma once

#include <cstdint>
#include <cstdio>
#include <memory>
#include <optional>
#include <string>
#include <string_view>

// fast-cpp-csv-parser copies file names with strncpy, which GCC 12 warns
// about when inlined at -O2 although the copy is bounded and terminated.
#pragma GCC diagnostic push
#pragma GCC diagnostic ignored "-Wstringop-truncation"
#include <libfccp/csv.h>
#pragma GCC diagnostic pop

namespace veq::ingest::detail {

// Where raw bytes come from.
class RawSource {
 public:
  virtual ~RawSource() = default;
  // Reads up to size bytes; returns 0 at end of input. Throws on read errors.
  virtual std::size_t read(char* buffer, std::size_t size) = 0;
  // The bytes left, when the source knows (a buffer in memory): a chunk need not be larger.
  [[nodiscard]] virtual std::optional<std::size_t> remaining() const { return std::nullopt; }
};

class FileSource final : public RawSource {
 public:
  explicit FileSource(std::FILE* file) : m_file(file) {}
  ~FileSource() override;
  std::size_t read(char* buffer, std::size_t size) override;

 private:
  std::FILE* m_file;
};

class MemorySource final : public RawSource {
 public:
  explicit MemorySource(std::string_view data) : m_data(data) {}
  std::size_t read(char* buffer, std::size_t size) override;
  [[nodiscard]] std::optional<std::size_t> remaining() const override { return m_data.size(); }

 private:
  std::string_view m_data;
};

enum class Encoding { utf8, utf8_bom, utf16le, utf16be };

// Decodes to UTF-8 on the fly and normalises CR LF and lone CR to LF, so that
// fast-cpp-csv-parser's LineReader sees plain LF lines and line numbers match
// what an editor shows. Bytes that are not valid UTF-8 are taken as Latin-1
// (a lone 0xB0 degree sign is the usual case). NUL bytes become U+FFFD so that
// they cannot cut a line short unnoticed.
class DecodingSource final : public ::io::ByteSourceBase {
 public:
  DecodingSource(std::unique_ptr<RawSource> raw, std::uint64_t max_raw_bytes);
  int read(char* buffer, int size) override;

  // Valid after the first read().
  [[nodiscard]] Encoding encoding() const { return m_encoding; }
  [[nodiscard]] bool latin1_seen() const { return m_latin1_seen; }
  [[nodiscard]] bool looks_binary() const { return m_looks_binary; }
  [[nodiscard]] bool over_limit() const { return m_over_limit; }
  [[nodiscard]] std::uint64_t raw_bytes() const { return m_raw_total; }
  // "lf", "crlf", "cr", "mixed" or "none".
  [[nodiscard]] std::string line_endings() const;

 private:
  bool refill();  // decodes one more raw chunk into m_out; false at end
  void start(std::string_view first);
  void emit_codepoint(std::uint32_t cp);
  void emit_char(char c);
  void flush_pending_cr();
  void decode_utf8(std::string_view in, bool last);
  void decode_utf16(std::string_view in, bool last);

  std::unique_ptr<RawSource> m_raw;
  std::uint64_t m_max_raw = 0;
  std::uint64_t m_raw_total = 0;
  bool m_started = false;
  bool m_raw_eof = false;
  bool m_pending_cr = false;
  bool m_latin1_seen = false;
  bool m_looks_binary = false;
  bool m_over_limit = false;
  Encoding m_encoding = Encoding::utf8;
  std::string m_carry;  // raw bytes of an incomplete sequence at a chunk end
  std::string m_out;    // decoded bytes not yet handed out
  std::size_t m_out_pos = 0;
  std::uint64_t m_lf = 0, m_crlf = 0, m_cr = 0;
  std::uint32_t m_high_surrogate = 0;
};

}  // namespace veq::ingest::detail
