// SPDX-License-Identifier: MIT
// Text made valid for the report formats: well-formed UTF-8 without control characters.
#pragma once

#include <string>
#include <string_view>

namespace veq::report::detail {

// Invalid UTF-8 (bad or truncated sequences, overlong forms, surrogates, code
// points above U+10FFFF) and the characters XML 1.0 and HTML do not allow
// (C0 controls other than tab, LF, CR; DEL; C1 controls; U+FFFE, U+FFFF)
// become U+FFFD, one per offending byte.
[[nodiscard]] std::string valid_utf8(std::string_view text);

}  // namespace veq::report::detail
