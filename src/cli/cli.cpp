// SPDX-License-Identifier: MIT
// Top level of the command line: one catch for input errors, one for bugs.
#include "cli/cli.hpp"

#include <algorithm>
#include <iostream>
#include <sstream>

#include "cli/commands.hpp"
#include "veq/analyze.hpp"
#include "veq/core/error.hpp"

namespace veq::cli {

int run_cli(const std::vector<std::string>& args, std::ostream& out, std::ostream& err) {
  CLI::App app{"veq: endpoints, results and indicator checks from potentiometric acid-base titration logs"};
  app.name("veq");
  app.set_version_flag("--version", "veq " + veq::version());
  app.require_subcommand(1);
  app.fallthrough(false);
  Action action;
  add_analyze(app, action);
  add_indicators(app, action);
  add_crosscheck(app, action);
  add_method(app, action);
  add_serve(app, action);
  add_simulate(app, action);
  add_batch(app, action);

  if (args.size() <= 1) {
    // No command at all: show what there is, as a usage error.
    err << app.help();
    return kExitUsage;
  }
  // An unknown command word: say so, and name the commands (CLI11 would only say one is required).
  if (!args[1].empty() && args[1][0] != '-') {
    bool known = false;
    std::string names;
    for (const CLI::App* sub : app.get_subcommands([](const CLI::App*) { return true; })) {
      names += (names.empty() ? "" : ", ") + sub->get_name();
      known = known || sub->check_name(args[1]);
    }
    if (!known) {
      err << "veq: error: '" << args[1] << "' is not a veq command\n";
      err << "  the commands are: " << names << "; 'veq --help' describes them\n";
      return kExitUsage;
    }
  }
  std::vector<std::string> reversed(args.size() > 1 ? args.begin() + 1 : args.end(), args.end());
  std::reverse(reversed.begin(), reversed.end());
  try {
    app.parse(reversed);
  } catch (const CLI::CallForHelp& e) {
    out << app.help();
    return kExitOk;
  } catch (const CLI::CallForAllHelp& e) {
    out << app.help("", CLI::AppFormatMode::All);
    return kExitOk;
  } catch (const CLI::CallForVersion& e) {
    out << "veq " << veq::version() << "\n";
    return kExitOk;
  } catch (const CLI::ParseError& e) {
    err << "veq: error: " << e.what() << "\n";
    err << "  run 'veq --help' or 'veq <command> --help' for usage\n";
    return kExitUsage;
  }
  try {
    return action ? action(out, err) : kExitUsage;
  } catch (const InputError& e) {
    err << "veq: error: " << e.what() << "\n";
    if (!e.hint().empty()) err << "  hint: " << e.hint() << "\n";
    return kExitUsage;
  } catch (const std::exception& e) {
    err << "veq: internal error (a bug in veq, please report it with the input file): " << e.what() << "\n";
    return kExitInternal;
  }
}

int run_cli(int argc, char** argv) {
  std::vector<std::string> args(argv, argv + argc);
  return run_cli(args, std::cout, std::cerr);
}

}  // namespace veq::cli
