// The `echoline` subcommands: each takes its arguments (after the subcommand name) and returns
// an exit code (exit_codes.hpp); edge code, may throw CliExit or drivers::ConfigError, which
// main() turns into a message and an exit code. One thread.
#pragma once

#include <string>
#include <vector>

namespace echoline::client {

using Argv = std::vector<std::string>;

int cmd_station(const Argv& argv);       // operator console
int cmd_recipe(const Argv& argv);        // recipe check FILE
int cmd_dry_run(const Argv& argv);       // dry-run RECIPE
int cmd_runs(const Argv& argv);          // runs --serial S | --lot L
int cmd_report(const Argv& argv);        // report --lot L --out FILE.html
int cmd_export(const Argv& argv);        // export --scope ... --key ... --format ... --out FILE
int cmd_cal(const Argv& argv);           // cal status | cal history
int cmd_status(const Argv& argv);        // status
int cmd_central(const Argv& argv);       // central migrate
int cmd_rejudge(const Argv& argv);       // rejudge --store FILE --lot LOT [--recipe FILE] (offline)

}  // namespace echoline::client
