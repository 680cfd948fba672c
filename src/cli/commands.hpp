// SPDX-License-Identifier: MIT
// Subcommand registration: one function per subcommand file.
#pragma once

#include <functional>
#include <iosfwd>

#include <CLI/CLI.hpp>

namespace veq::cli {

// A registered subcommand runs this after parsing; it returns the exit code.
using Action = std::function<int(std::ostream& out, std::ostream& err)>;

// Each adds its subcommand to app and stores what to run in action.
void add_analyze(CLI::App& app, Action& action);
void add_indicators(CLI::App& app, Action& action);
void add_crosscheck(CLI::App& app, Action& action);
void add_method(CLI::App& app, Action& action);
void add_serve(CLI::App& app, Action& action);
void add_simulate(CLI::App& app, Action& action);
void add_batch(CLI::App& app, Action& action);

}  // namespace veq::cli
