// echoline-sim: the instrument simulator process (a source, a receiver, optionally a switch, and
// the fixture control port) on loopback TCP and/or pseudo-terminals. Parses the command line,
// loads the config and lot, prints the endpoints and `ready`, serves until SIGTERM/SIGINT.
// Exit codes: 0 clean stop, 1 runtime failure, 2 usage or configuration error.
#include <csignal>
#include <cstdio>
#include <filesystem>
#include <iostream>
#include <optional>
#include <string>
#include <vector>

#include <spdlog/spdlog.h>

#include "drivers/config_error.hpp"
#include "drivers/logging.hpp"
#include "echoline/version.hpp"
#include "simulator/faults.hpp"
#include "simulator/physics/lot.hpp"
#include "simulator/server.hpp"
#include "simulator/sim_config.hpp"

namespace {

constexpr int kExitOk = 0;
constexpr int kExitRuntime = 1;
constexpr int kExitUsage = 2;

void print_help() {
  std::cout << R"(echoline-sim: simulated signal generator, spectrum analyzer and switch for Echoline.

Usage:
  echoline-sim --config <bench.jsonc> [--lot <lot.jsonc>] [--profile instant|bench]
               [--log-file <file>] [--log-level trace|debug|info|warn|error|off]
  echoline-sim --help | --version

Options:
  --config F     simulated bench (required): physics, instruments, endpoints, faults, latency.
                 Examples: config/sim/instant.jsonc, config/sim/bench.jsonc,
                 config/sim/instant-serial.jsonc (receiver on a pseudo-terminal).
  --lot F        lot of simulated units (overrides "lot" in the config), e.g.
                 config/sim/lots/whip915-lot-a.jsonc. Needed to connect units by serial.
  --profile P    latency profile, overrides the config's "latency.profile":
                   instant  replies at once; a virtual clock makes every settling and sweep
                            count as done (fast tests)
                   bench    real waits: modelled sweep/settling time plus a per-command
                            processing time (latency.command_ms, default 3 ms)
  --log-file F   log every command received (with role and endpoint) to F instead of stderr
                 (its folder is made when missing).
  --log-level L  default info (every command); debug adds every reply; off logs nothing.
  --version      print the version and the commit it was built from, as in
                 echoline-sim 0.2.0 (g1234abc), and exit.
  --help         this text.

On start it prints one line per endpoint, then "ready", on stdout:
  endpoint role=source transport=tcp address=tcp://127.0.0.1:40111
  endpoint role=receiver transport=pty address=serial:/dev/pts/7?baud=115200 link=/tmp/sa
  endpoint role=control transport=tcp address=tcp://127.0.0.1:40113
  ready
Port 0 in the config picks a free port. A pty's "link" (if configured) is a symlink to the
slave device, removed at exit.

Control port (TCP, one JSON object per line, one reply line each with "ok" and, when false,
"error"):
  {"cmd":"connect","standard":"OPEN"|"SHORT"|"LOAD"|"MISMATCH-A"|"MISMATCH-B"}   {"cmd":"connect","unit":"<serial>"}
  {"cmd":"connect","unit":"<serial>","via":"offset-line"}   the unit behind the offset line
   ("standards"/"offset_line"; the switch's DUT-OFFSET position does the same)
  {"cmd":"disconnect"}   {"cmd":"units"}   {"cmd":"status"}
  {"cmd":"truth","unit":"<serial>","frequencies_hz":[...]}  -> true return loss, defect, f0
  {"cmd":"fault","role":"source|receiver|switch","kind":"<kind>","probability":1,"seed":1,
   "delay_ms":500}   kinds: )" << echoline::sim::fault_kind_names() << R"(
  {"cmd":"clear-faults"[,"role":"..."][,"kind":"..."]}

Signals: SIGTERM or SIGINT stop it cleanly (exit 0).
Exit codes: 0 clean stop, 1 runtime failure, 2 usage or configuration error.
Safety: this is a simulator. A real analyzer is damaged above its maximum safe input level,
and a real antenna radiates; the simulator's settings say nothing about real equipment.
)";
}

struct Args {
  std::filesystem::path config;
  std::optional<std::filesystem::path> lot;
  std::optional<std::string> profile;
  std::optional<std::filesystem::path> log_file;
  std::string log_level = "info";
  bool help = false;
  bool version = false;
};

// Returns an error message, or "" on success.
std::string parse_args(int argc, char** argv, Args& args) {
  std::vector<std::string> a(argv + 1, argv + argc);
  for (std::size_t i = 0; i < a.size(); ++i) {
    const std::string& opt = a[i];
    auto value = [&](std::string& out) -> std::string {
      if (i + 1 >= a.size()) return opt + " needs a value";
      out = a[++i];
      return "";
    };
    std::string v;
    std::string err;
    if (opt == "--help" || opt == "-h") {
      args.help = true;
    } else if (opt == "--version") {
      args.version = true;
    } else if (opt == "--config") {
      err = value(v);
      args.config = v;
    } else if (opt == "--lot") {
      err = value(v);
      args.lot = v;
    } else if (opt == "--profile") {
      err = value(v);
      if (err.empty() && v != "instant" && v != "bench") err = "--profile must be instant or bench, not \"" + v + "\"";
      args.profile = v;
    } else if (opt == "--log-file") {
      err = value(v);
      args.log_file = v;
    } else if (opt == "--log-level") {
      err = value(v);
      if (err.empty() && spdlog::level::from_str(v) == spdlog::level::off && v != "off") {
        err = "--log-level must be trace, debug, info, warn, error or off, not \"" + v + "\"";
      }
      args.log_level = v;
    } else {
      err = "unknown option \"" + opt + "\"";
    }
    if (!err.empty()) return err;
  }
  if (!args.help && !args.version && args.config.empty()) return "--config <bench.jsonc> is required";
  return "";
}

void start_logging(const Args& args) {
  echoline::LogOptions o;
  o.program = "echoline-sim";
  if (args.log_file) {
    o.file = *args.log_file;
    o.console = false;   // the command log goes to the file instead of stderr
  }
  o.level = args.log_level;
  o.flush_level = "warn";   // every command is an info line: flushed each second instead
  echoline::setup_logging(o);
  spdlog::flush_every(std::chrono::seconds(1));
}

}  // namespace

int main(int argc, char** argv) {
  Args args;
  if (const std::string err = parse_args(argc, argv, args); !err.empty()) {
    std::cerr << "echoline-sim: " << err << " (see --help)\n";
    return kExitUsage;
  }
  if (args.help) {
    print_help();
    return kExitOk;
  }
  if (args.version) {
    std::cout << echoline::version_line("echoline-sim") << "\n";
    return kExitOk;
  }
  std::signal(SIGPIPE, SIG_IGN);

  try {
    start_logging(args);
  } catch (const std::exception& e) {
    std::cerr << "echoline-sim: --log-file " << args.log_file->string() << ": " << e.what() << "\n";
    return kExitUsage;
  }

  std::optional<echoline::sim::SimConfig> config;
  std::optional<echoline::sim::Lot> lot;
  try {
    config = echoline::sim::load_sim_config(args.config);
    if (args.profile) config->latency = *echoline::sim::override_profile(config->latency, *args.profile);
    const auto lot_file = args.lot ? args.lot : config->lot;
    if (lot_file) lot = echoline::sim::load_lot(*lot_file);
  } catch (const std::exception& e) {
    std::cerr << "echoline-sim: " << e.what() << "\n";
    spdlog::shutdown();
    return kExitUsage;
  }

  std::unique_ptr<echoline::sim::Server> server;
  try {
    server = std::make_unique<echoline::sim::Server>(std::move(*config), std::move(lot));
  } catch (const echoline::drivers::ConfigError& e) {
    std::cerr << "echoline-sim: " << e.what() << "\n";
    spdlog::shutdown();
    return kExitUsage;
  } catch (const std::exception& e) {
    std::cerr << "echoline-sim: cannot start: " << e.what() << "\n";
    spdlog::shutdown();
    return kExitRuntime;
  }

  for (const auto& line : server->endpoint_lines()) std::cout << line << '\n';
  std::cout << "ready" << std::endl;

  int code = kExitRuntime;
  try {
    code = server->run();
  } catch (const std::exception& e) {
    spdlog::error("runtime failure: {}", e.what());
    std::cerr << "echoline-sim: runtime failure: " << e.what() << "\n";
    code = kExitRuntime;
  }
  server.reset();   // closes endpoints, removes pty links
  spdlog::shutdown();
  return code;
}
