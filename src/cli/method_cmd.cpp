// SPDX-License-Identifier: MIT
// `veq method new KIND` writes a commented template; `veq method check FILE` reads one back.
#include <fmt/format.h>

#include <iostream>
#include <memory>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "veq/core/atomic_file.hpp"
#include "veq/method/method.hpp"

namespace veq::cli {

void add_method(CLI::App& app, Action& action) {
  struct State {
    std::string kind;
    std::string out;
    std::string file;
    bool force = false;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd = app.add_subcommand("method", "Write or check method files");
  cmd->require_subcommand(1);
  std::string kinds;
  for (const auto& k : method::method_kinds()) kinds += (kinds.empty() ? "" : ", ") + k;
  CLI::App* make = cmd->add_subcommand("new", "Write a commented method template (" + kinds + ")");
  make->add_option("KIND", st->kind, "One of: " + kinds)->required();
  make->add_option("-o,--out", st->out, "Write to FILE instead of standard output");
  make->add_flag("--force", st->force, "Replace an existing file");
  make->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream&) {
      const std::string text = method::method_template(st->kind);
      if (st->out.empty())
        out << text;
      else
        io::write_file_atomically(st->out, text, st->force);
      return kExitOk;
    };
  });
  CLI::App* check = cmd->add_subcommand("check", "Read a method file and say what it computes");
  check->add_option("FILE", st->file, "The method file")->required();
  check->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream&) {
      const method::Method m = method::load_method(st->file);
      out << fmt::format("{}: method '{}' ({}), {} result(s)\n", m.path, m.name, m.kind, m.results.size());
      for (const auto& r : m.results) {
        out << fmt::format("  {}: {} from ", r.name, method::to_string(r.unit));
        // A fixed-pH endpoint is read off the curve where it crosses that pH: no estimate to choose.
        if (r.endpoint.at_pH)
          out << fmt::format("the volume where the curve crosses pH {:g}\n", *r.endpoint.at_pH);
        else {
          if (r.endpoint.last)
            out << "the last endpoint";
          else
            out << fmt::format("endpoint {}", r.endpoint.index);
          out << fmt::format(" ({} volume)\n", method::to_string(r.endpoint.source));
        }
      }
      if (!m.titer_file.empty()) out << "  titrant concentration from " << m.titer_file << "\n";
      return kExitOk;
    };
  });
}

}  // namespace veq::cli
