// SPDX-License-Identifier: MIT
// `veq serve`: the local upload page for the bench.
#include <iostream>
#include <memory>

#include <fmt/format.h>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "serve/server.hpp"
#include "veq/core/error.hpp"
#include "veq/report/text.hpp"

namespace veq::cli {

void add_serve(CLI::App& app, Action& action) {
  struct State {
    serve::ServeOptions opt;
    std::string method_dir;
    bool allow_remote = false;
    double max_upload_MiB = 16;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd = app.add_subcommand("serve", "Serve the local upload page: drop runs, pick a method, read the results");
  cmd->add_option("--port", st->opt.port, "Port to listen on (default 8750; 0: any free port)")->check(CLI::Range(0, 65535));
  cmd->add_option("--bind", st->opt.bind_address, "Address to listen on (default 127.0.0.1: this computer only)");
  cmd->add_flag("--allow-remote", st->allow_remote, "Allow an address other computers can reach (needed with a non-loopback --bind)");
  cmd->add_option("--method-dir", st->method_dir, "Folder of method files (*.toml) offered on the page");
  cmd->add_option("--max-upload", st->max_upload_MiB, "Largest file accepted [MiB] (default 16)")->check(CLI::Range(0.01, 1024.0));
  cmd->add_option("--threads", st->opt.threads, "Worker threads (default: hardware threads)")->check(CLI::Range(0, 256));
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      if (!serve::is_loopback(st->opt.bind_address)) {
        if (!st->allow_remote) {
          throw InputError({"--bind", 0, 0}, "'" + st->opt.bind_address + "' can be reached from other computers",
                           "add --allow-remote if that is what you want (there is no login: anyone who can reach it can upload)");
        }
        err << "veq: warning: listening on " << st->opt.bind_address
            << ": other computers on the network can reach this page; there is no login\n";
      }
      st->opt.method_dir = st->method_dir;
      st->opt.max_file_bytes = static_cast<std::size_t>(st->max_upload_MiB * 1048576.0);
      serve::Server server(st->opt);
      const int port = server.bind();
      const std::string host = st->opt.bind_address.find(':') != std::string::npos ? "[" + st->opt.bind_address + "]"
                                                                                     : st->opt.bind_address;
      out << fmt::format("veq serve: open http://{}:{}/ in a browser (Ctrl-C stops it)\n", host, port);
      out << report::safety_caution() << "\n";
      out.flush();
      server.run();
      return kExitOk;
    };
  });
}

}  // namespace veq::cli
