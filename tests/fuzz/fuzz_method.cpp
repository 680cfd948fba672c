// SPDX-License-Identifier: MIT
// libFuzzer harness: the method-file reader on arbitrary bytes returns a Method or throws InputError.
#include <cstddef>
#include <cstdint>
#include <string_view>

#include "veq/method/method.hpp"
#include "veq/core/error.hpp"

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  try {
    (void)veq::method::parse_method(std::string_view(reinterpret_cast<const char*>(data), size), "fuzz.toml");
  } catch (const veq::InputError&) {
  }
  return 0;
}
