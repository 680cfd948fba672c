// SPDX-License-Identifier: MIT
// `veq indicators [--ph X]`: the indicator table, or the indicators whose colour changes at a pH.
#include <fmt/format.h>

#include <cmath>
#include <iostream>
#include <memory>
#include <optional>

#include "cli/cli.hpp"
#include "cli/commands.hpp"
#include "veq/core/error.hpp"
#include "veq/indicators/table.hpp"
#include "veq/report/indicators.hpp"

namespace veq::cli {

void add_indicators(CLI::App& app, Action& action) {
  struct State {
    std::optional<double> pH;
    bool sources = false;
  };
  auto st = std::make_shared<State>();
  CLI::App* cmd =
      app.add_subcommand("indicators", "List the acid-base indicator table, or those that change colour at a pH");
  cmd->add_option(
      "--ph", st->pH, "Only the indicators whose transition range contains this pH, closest midpoint first");
  cmd->add_flag("--sources", st->sources, "Show where each row's values come from");
  cmd->callback([st, &action] {
    action = [st](std::ostream& out, std::ostream& err) {
      (void)err;
      const auto& table = indicators::IndicatorTable::builtin();
      std::vector<const indicators::Indicator*> rows;
      if (st->pH) {
        if (!std::isfinite(*st->pH) || *st->pH < -1.0 || *st->pH > 15.0) {
          throw InputError(
              {"--ph", 0, 0}, fmt::format("pH {} is outside -1..15", *st->pH), "give the endpoint pH, e.g. --ph 8.7");
        }
        rows = table.bracketing(*st->pH);
      } else {
        for (const auto& r : table.rows()) rows.push_back(&r);
      }
      out << report::indicator_table_text(rows, st->pH, st->sources);
      return kExitOk;
    };
  });
}

}  // namespace veq::cli
