// SPDX-License-Identifier: MIT
// libFuzzer harness: the whole analyze pipeline and its reports on arbitrary bytes; no crash, no NaN in JSON.
#include <cstddef>
#include <cstdint>
#include <string>
#include <string_view>

#include <nlohmann/json.hpp>

#include "veq/analyze.hpp"
#include "veq/ingest/reader.hpp"
#include "veq/report/json.hpp"
#include "veq/report/text.hpp"

namespace {

// Keys whose value must be a number wherever they appear (outside the indicator
// and specification objects, where a missing number is written null on purpose).
bool numbers_present(const nlohmann::json& j) {
  if (j.is_array()) {
    for (const auto& x : j) {
      if (!numbers_present(x)) return false;
    }
    return true;
  }
  if (!j.is_object()) return true;
  for (const auto& [key, value] : j.items()) {
    if (key == "indicators" || key == "indicators_also_suitable" || key == "spec" || key == "metadata") continue;
    const bool numeric = key == "pH" || key == "mV" || key == "snr" || key == "peak_slope" || key == "r2" ||
                         key == "noise_sd" || key == "value" || key == "uncertainty" ||
                         (key.size() > 3 && key.compare(key.size() - 3, 3, "_mL") == 0);
    if (numeric && !value.is_number() && !value.is_array()) return false;
    if (!numbers_present(value)) return false;
  }
  return true;
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  veq::ingest::IngestOptions o;
  o.max_file_bytes = 1 << 20;
  o.max_line_bytes = 1 << 16;
  try {
    veq::Run run = veq::ingest::parse_run(std::string_view(reinterpret_cast<const char*>(data), size), "fuzz", o);
    // Half the inputs get a sample volume so that Gran runs too.
    if (size % 2 == 0) run.facts.sample_volume_mL = 25.0, run.facts.titrant_conc_mol_L = 0.1;
    const veq::Analysis a = veq::analyze(std::move(run));
    // nlohmann writes NaN and infinity as null: no number the report promises may be null.
    const nlohmann::json j = nlohmann::json::parse(veq::report::to_json(a));
    if (!numbers_present(j)) __builtin_trap();
    (void)veq::report::to_text(a);
  } catch (const veq::InputError&) {
  }
  return 0;
}
