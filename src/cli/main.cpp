// SPDX-License-Identifier: MIT
// veq executable: everything happens in the library and run_cli().
#include <csignal>

#include "cli/cli.hpp"

int main(int argc, char** argv) {
  // A file-size limit (ulimit -f) must make a write fail like a full disk, with a clear
  // message and the batch going on, not kill the process.
  std::signal(SIGXFSZ, SIG_IGN);
  return veq::cli::run_cli(argc, argv);
}
