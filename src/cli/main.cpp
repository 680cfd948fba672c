// SPDX-License-Identifier: MIT
// veq executable: everything happens in the library and run_cli().
#include "cli/cli.hpp"

int main(int argc, char** argv) { return veq::cli::run_cli(argc, argv); }
