// SPDX-License-Identifier: MIT
// libFuzzer harness: ingest on arbitrary bytes must return a Run or throw InputError, nothing else.
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "veq/ingest/reader.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  veq::ingest::IngestOptions o;
  o.max_file_bytes = 1 << 20;
  o.max_line_bytes = 1 << 16;
  try {
    const veq::Run r = veq::ingest::parse_run(std::string_view(reinterpret_cast<const char*>(data), size), "fuzz", o);
    if (r.volume_mL.size() != r.signal_values.size() || r.volume_mL.size() != r.line.size()) __builtin_trap();
  } catch (const veq::InputError&) {
  }
  return 0;
}
