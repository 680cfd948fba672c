// SPDX-License-Identifier: MIT
// libFuzzer harness: the whole analyze pipeline and its reports on arbitrary bytes; no crash, no NaN in JSON.
#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  veq::ingest::IngestOptions o;
  o.max_file_bytes = 1 << 20;
  o.max_line_bytes = 1 << 16;
  try {
    veq::Run run = veq::ingest::parse_run(std::string_view(reinterpret_cast<const char*>(data), size), "fuzz", o);
    // Half the inputs get a sample volume so that Gran runs too.
    if (size % 2 == 0) run.facts.sample_volume_mL = 25.0, run.facts.titrant_conc_mol_L = 0.1;
    const veq::Analysis a = veq::analyze(std::move(run));
    const std::string json = veq::report::to_json(a);
    if (json.find("NaN") != std::string::npos || json.find("nan") != std::string::npos ||
        json.find("inf") != std::string::npos) {
      // "inf" may be user text (e.g. in metadata): only a bare number token is a defect.
      for (std::size_t p = json.find(": nan"); p != std::string::npos;) __builtin_trap();
      if (json.find(": NaN") != std::string::npos || json.find(": inf") != std::string::npos ||
          json.find(": -inf") != std::string::npos) {
        __builtin_trap();
      }
    }
    (void)veq::report::to_text(a);
  } catch (const veq::InputError&) {
  }
  return 0;
}
