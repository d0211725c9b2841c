// echoline: the station's client. `echoline station` is the operator console; the other
// subcommands are for the test engineer. Dispatches to daemon/client/commands.hpp and turns the
// edge exceptions (CliExit, ConfigError) into a message on stderr and an exit code.
#include <iostream>
#include <map>
#include <string>
#include <vector>

#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "drivers/config_error.hpp"
#include "drivers/logging.hpp"
#include "echoline/version.hpp"

namespace {

using namespace echoline::client;

constexpr const char* kHelp =
    "usage: echoline COMMAND [options]      (echoline COMMAND --help for each)\n"
    "\n"
    "The client of the Echoline test station daemon (echolined).\n"
    "\n"
    "operator:\n"
    "  station        the operator console: scan a serial, read PASS / FAIL / INCONCLUSIVE and\n"
    "                 what to do with the unit; calibration prompts when it is due\n"
    "engineer:\n"
    "  recipe check FILE   check a recipe against the station (offline), findings with file:line\n"
    "  dry-run RECIPE      the recipe's check, sweep plan and time estimate, no instrument touched\n"
    "  runs                stored runs of a serial (--serial) or a lot (--lot)\n"
    "  report              the HTML lot report (--lot, --out)\n"
    "  export              runs as CSV or JSON, or one run as a Touchstone s1p file\n"
    "                      (--scope run|serial|lot, --key or --run, --format, --out)\n"
    "  cal status|history  the calibration in use; the calibrations used so far\n"
    "  status              the daemon's station, recipe, instruments, calibration, current job\n"
    "                      and forwarding to the central database\n"
    "  rejudge             a lot's stored runs judged again offline (--store, --lot), with the\n"
    "                      points' intervals alone and with the dip fit, optionally under another\n"
    "                      recipe's limits (--recipe); prints the comparison\n"
    "  (status, runs and cal take --json: one JSON object on standard output instead of text)\n"
    "administrator:\n"
    "  central migrate     create or upgrade the central PostgreSQL database's schema and roles\n"
    "\n"
    "  --version           print the version and the commit it was built from, as in\n"
    "                      echoline 0.2.0 (g1234abc), and exit\n"
    "\n"
    "exit codes:\n"
    "  0  done (the console session ended normally; no errors found)\n"
    "  1  a unit or check came out negative: a recipe with errors, nothing stored under the key,\n"
    "     or the daemon refused the request (busy, calibration due, ...)\n"
    "  2  usage or configuration error (bad option, bad config file, token refused)\n"
    "  3  the daemon could not be reached, or the connection to it dropped\n"
    "  4  instrument trouble: the daemon could not use an instrument (status: one is NOT READY;\n"
    "     station: a scanned unit was left untested because of the instruments)\n"
    "  5  storage error: the run store could not be read or written\n"
    "\n"
    "Safety: during a test the antenna under test radiates the source power. Keep it low, use a\n"
    "shielded enclosure where local rules require one, and stay within the bands you may use.\n";

}  // namespace

int main(int argc, char** argv) {
  std::vector<std::string> args(argv + 1, argv + argc);
  if (args.empty()) {
    std::cerr << kHelp;
    return kExitUsage;
  }
  const std::string command = args.front();
  if (command == "--help" || command == "-h" || command == "help") {
    std::cout << kHelp;
    return kExitOk;
  }
  if (command == "--version") {
    std::cout << echoline::version_line("echoline") << "\n";
    return kExitOk;
  }
  static const std::map<std::string, int (*)(const Argv&)> commands = {
      {"station", cmd_station}, {"recipe", cmd_recipe}, {"dry-run", cmd_dry_run}, {"runs", cmd_runs},
      {"report", cmd_report},   {"export", cmd_export}, {"cal", cmd_cal},         {"status", cmd_status},
      {"central", cmd_central},
      {"rejudge", cmd_rejudge},
  };
  auto it = commands.find(command);
  if (it == commands.end()) {
    std::cerr << "echoline: unknown command \"" << command << "\"\n(see echoline --help)\n";
    return kExitUsage;
  }
  // Library warnings (a driver's, a store's) go to stderr, never into the command's output.
  echoline::LogOptions log;
  log.program = "echoline";
  log.level = "warn";
  echoline::setup_logging(log);
  try {
    return it->second(Argv(args.begin() + 1, args.end()));
  } catch (const CliExit& e) {
    if (*e.what()) std::cerr << "echoline: " << e.what() << "\n";
    return e.code;
  } catch (const echoline::drivers::ConfigError& e) {
    std::cerr << "echoline: " << e.what() << "\n";
    return kExitUsage;
  } catch (const std::exception& e) {
    std::cerr << "echoline " << command << ": " << e.what() << "\n";
    return kExitNegative;
  }
}
