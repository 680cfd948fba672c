// SPDX-License-Identifier: MIT
// The `veq` command line: parse arguments, call the library, map results to exit codes.
#pragma once

#include <iosfwd>
#include <string>
#include <vector>

namespace veq::cli {

// Exit codes (stable; documented in the README).
inline constexpr int kExitOk = 0;        // all good
inline constexpr int kExitFailed = 1;    // some runs failed or were flagged as failed
inline constexpr int kExitUsage = 2;     // usage error, or a bad input file
inline constexpr int kExitInternal = 3;  // internal error (a bug)

// Runs the command line; args[0] is the program name. Output to out, messages to err.
int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err);

// Entry point used by main().
int run_cli(int argc, char** argv);

}  // namespace veq::cli
