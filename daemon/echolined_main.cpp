// echolined: the station daemon. Loads the station config, connects the instruments, serves the
// JSON-lines API (daemon/service/API.md) on a Unix socket and optional TCP, and stops cleanly on
// SIGTERM/SIGINT: stop accepting, abort (or finish) the current run, close the store, exit 0.
#include <signal.h>
#include <sys/stat.h>
#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <iostream>
#include <optional>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/service/api_handler.hpp"
#include "daemon/service/api_server.hpp"
#include "daemon/service/instance_lock.hpp"
#include "daemon/service/instruments.hpp"
#include "daemon/service/sd_notify.hpp"
#include "drivers/logging.hpp"
#include "daemon/service/watchdog.hpp"
#include "daemon/web/web_server.hpp"
#include "daemon/service/station.hpp"
#include "drivers/config_error.hpp"
#include "drivers/station_config.hpp"
#include "drivers/whole_number.hpp"
#include "echoline/version.hpp"

namespace {

using namespace echoline;

constexpr const char* kUsage = R"(usage: echolined --config FILE [options]

Runs the Echoline test station: instruments from the station config, the API on a Unix socket
(and TCP when configured). Prints "listening unix=<path> tcp=<addr>" when ready.

options:
  --config FILE            station config (JSON with comments), required
  --override ROLE=ADDRESS  use ADDRESS for the instrument with ROLE (repeatable), e.g.
                           --override source=tcp://127.0.0.1:5025
  --data-dir DIR           run store folder (overrides data_dir)
  --log-dir DIR            log folder (overrides log_dir)
  --no-log-file            no log file, stderr only (under systemd the journal keeps it)
  --recipe FILE            recipe to load (overrides recipe)
  --socket PATH            Unix socket path (overrides api.unix_socket)
  --tcp-port N|auto        TCP port on api.tcp_host, 0 to 65535 (0 = off), or auto for any
                           free port (shown in the listening line); overrides api.tcp_port
  --web-port N|auto        port of the pages and /metrics on web.host, 0 to 65535 (0 = off), or
                           auto for any free port (shown in the listening line); overrides
                           web.port. Open http://127.0.0.1:N/ for the operator page and
                           http://127.0.0.1:N/supervisor for the line supervisor's
  --on-stop abort|finish   on SIGTERM: abort the running test (default, stored as aborted
                           with reason "daemon stopping") or let it finish first
  --log-level LEVEL        trace, debug, info (default), warn, error
                           Log lines go to stderr and to <log_dir>/echolined.log (rotated at
                           5 MB, 3 files). When stderr is the systemd journal (JOURNAL_STREAM)
                           they carry its priority prefixes and no timestamp of their own.
  --rf-off                 do not serve: connect the configured source alone, switch its RF
                           output OFF, confirm with *OPC? and exit (0 = confirmed OFF, 1 = not
                           confirmed, 2 = bad config). For the service manager after a crash
                           (ExecStopPost in config/echolined.service) and for the bench.
  --version                print the version and the commit it was built from, as in
                           echolined 0.2.0 (g1234abc), and exit
  --help                   this text

RF exposure: during a test the source output is ON and an antenna under test radiates.
)";

struct Args {
  std::string config;
  std::vector<std::pair<std::string, std::string>> overrides;
  std::string data_dir, log_dir, recipe, socket, log_level = "info", on_stop = "abort";
  std::optional<int> tcp_port, web_port;
  bool rf_off = false;
  bool no_log_file = false;
};

// --tcp-port auto: the API server binds port 0 and the kernel picks a free one.
constexpr int kAnyFreePort = -1;

[[noreturn]] void usage_error(const std::string& message) {
  std::cerr << "echolined: " << message << "\n(see echolined --help)\n";
  std::exit(2);
}

// A port option: 0 to 65535, or auto (kAnyFreePort); anything else is a usage error.
int port_option(const char* option, const std::string& v, const char* meaning) {
  if (v == "auto") return kAnyFreePort;
  const auto port = drivers::parse_whole_number(v, 0, 65535);
  if (!port) usage_error(drivers::whole_number_error(option, v, 0, 65535, meaning));
  return static_cast<int>(*port);
}

Args parse_args(int argc, char** argv) {
  Args a;
  auto value = [&](int& i) -> std::string {
    if (i + 1 >= argc) usage_error(fmt::format("{} needs a value", argv[i]));
    return argv[++i];
  };
  for (int i = 1; i < argc; ++i) {
    const std::string arg = argv[i];
    if (arg == "--help" || arg == "-h") {
      std::cout << kUsage;
      std::exit(0);
    } else if (arg == "--version") {
      std::cout << version_line("echolined") << "\n";
      std::exit(0);
    } else if (arg == "--config") {
      a.config = value(i);
    } else if (arg == "--override") {
      std::string v = value(i);
      auto eq = v.find('=');
      if (eq == std::string::npos || eq == 0) usage_error(fmt::format("--override {}: expected ROLE=ADDRESS", v));
      a.overrides.emplace_back(v.substr(0, eq), v.substr(eq + 1));
    } else if (arg == "--data-dir") {
      a.data_dir = value(i);
    } else if (arg == "--log-dir") {
      a.log_dir = value(i);
    } else if (arg == "--no-log-file") {
      a.no_log_file = true;
    } else if (arg == "--recipe") {
      a.recipe = value(i);
    } else if (arg == "--socket") {
      a.socket = value(i);
    } else if (arg == "--tcp-port") {
      a.tcp_port = port_option("--tcp-port", value(i), "0 = no TCP listener; or auto");
    } else if (arg == "--web-port") {
      a.web_port = port_option("--web-port", value(i), "0 = no pages; or auto");
    } else if (arg == "--on-stop") {
      a.on_stop = value(i);
      if (a.on_stop != "abort" && a.on_stop != "finish") usage_error("--on-stop must be abort or finish");
    } else if (arg == "--rf-off") {
      a.rf_off = true;
    } else if (arg == "--log-level") {
      a.log_level = value(i);
    } else {
      usage_error(fmt::format("unknown option {}", arg));
    }
  }
  if (a.config.empty()) usage_error("--config FILE is required");
  return a;
}

bool logging_started = false;   // before it, spdlog's default logger would write to stdout

void start_logging(const drivers::StationConfig& config, const std::string& level) {
  logging_started = true;
  LogOptions o;
  o.program = "echolined";
  if (!config.log_dir.empty()) o.file = config.log_dir / "echolined.log";
  o.level = level;
  o.console_never_blocks = true;   // SAFETY: a paused terminal must not stall a sweep with RF on
  try {
    setup_logging(o);
  } catch (const std::invalid_argument& e) {
    usage_error(fmt::format("--log-level {}: unknown level", level));
  }
}

// The API token named by api.token_file; a missing or short one is a configuration error at
// that key, with how to make one.
std::string read_token(const drivers::StationConfig& config) {
  const std::filesystem::path& file = config.api.token_file;
  if (file.empty()) return "";
  const auto fail = [&](const std::string& what) {
    throw drivers::ConfigError(
        config.file, config.api.token_file_line, "/api/token_file",
        fmt::format("{}: {}. Make one readable by the daemon's user only, for example: umask 077; head -c 24 "
                    "/dev/urandom | base64 > {} (or remove the key: the API then serves the local socket only)",
                    file.string(), what, file.string()));
  };
  std::error_code ec;
  if (!std::filesystem::exists(file, ec)) fail("no such file");
  std::ifstream in(file);
  if (!in) fail("cannot be read");
  std::stringstream ss;
  ss << in.rdbuf();
  std::string t = ss.str();
  while (!t.empty() && (t.back() == '\n' || t.back() == '\r' || t.back() == ' ' || t.back() == '\t')) t.pop_back();
  if (t.size() < 16) fail("the token is shorter than 16 characters");
  return t;
}

// The token is a password: a file others may read gives it to every account on the station
// computer. It still serves (the engineer decides), but says so at every start.
void warn_if_token_file_is_open(const drivers::StationConfig& config) {
  struct stat st {};
  if (config.api.token_file.empty() || ::stat(config.api.token_file.c_str(), &st) != 0) return;
  if ((st.st_mode & 077) == 0) return;
  spdlog::warn("{}: the API token file may be read by group or others (mode {:03o}): any account on this "
               "computer can take the engineer role; chmod 600 {}",
               config.api.token_file.string(), st.st_mode & 0777, config.api.token_file.string());
}

// SAFETY: the source's RF output OFF without serving; see --rf-off in the usage text.
int rf_off(const drivers::StationConfig& config) {
  service::Instruments instruments(config);
  const std::string who = fmt::format("source {} ({})", instruments.source().session().name(),
                                      instruments.source().session().address());
  // A source that accepts the connection but does not answer holds this for its timeouts.
  std::cerr << "echolined: --rf-off: switching the RF output of " << who << " off and confirming it..." << std::endl;
  if (Status s = instruments.source_output_off(); !s) {
    spdlog::error("--rf-off: {}: RF output NOT confirmed off: {}", who, s.error().message);
    std::cerr << "echolined: --rf-off: " << who << ": RF output NOT confirmed off: " << s.error().message
              << "\nSwitch the source's RF output off at its front panel.\n";
    return 1;
  }
  spdlog::info("--rf-off: {}: RF output off, confirmed", who);
  std::cout << who << ": RF output off, confirmed\n";
  return 0;
}

int run(const Args& args) {
  drivers::StationConfig config = drivers::load_station_config(args.config);
  // A bad role or address throws ConfigError naming the --override value (exit 2).
  for (const auto& [role, address] : args.overrides) drivers::apply_address_override(config, role, address);
  if (!args.data_dir.empty()) config.data_dir = std::filesystem::absolute(args.data_dir);
  if (!args.log_dir.empty()) config.log_dir = std::filesystem::absolute(args.log_dir);
  if (args.no_log_file) config.log_dir.clear();
  if (!args.recipe.empty()) config.recipe = std::filesystem::absolute(args.recipe);
  if (!args.socket.empty()) config.api.unix_socket = std::filesystem::absolute(args.socket);
  if (args.tcp_port) config.api.tcp_port = *args.tcp_port;
  if (args.web_port) config.web.port = *args.web_port;
  // The config's own check (a listener off loopback needs a token file) again, now that a port
  // may have come from the command line: the same exit 2, before any instrument is touched.
  if (config.api.token_file.empty()) {
    if (args.tcp_port && config.api.tcp_port != 0 && !drivers::is_loopback_host(config.api.tcp_host)) {
      throw drivers::ConfigError(config.file, 0, "/api/tcp_host",
                                 fmt::format("--tcp-port: listening on {} (not loopback) needs api.token_file: anyone on "
                                             "the network could otherwise drive the instruments",
                                             config.api.tcp_host));
    }
    if (args.web_port && config.web.port != 0 && !drivers::is_loopback_host(config.web.host)) {
      throw drivers::ConfigError(config.file, 0, "/web/host",
                                 fmt::format("--web-port: serving the pages on {} (not loopback) needs api.token_file: "
                                             "anyone on the network could otherwise drive the instruments",
                                             config.web.host));
    }
  }

  if (args.rf_off) {
    start_logging(config, args.log_level);
    return rf_off(config);
  }
  const std::string token = read_token(config);
  // A second daemon on the same store stops here, before it writes into the first one's log,
  // finalizes its run in progress or resets an instrument in the middle of its sweep.
  const service::InstanceLock lock = service::InstanceLock::acquire(config.data_dir / (config.station + ".lock"));
  start_logging(config, args.log_level);
  warn_if_token_file_is_open(config);
  spdlog::info("{} starting: station {} config {}", version_line("echolined"), config.station, config.file);

  // Signals are taken by sigwait() on this thread; block them before any thread starts.
  sigset_t signals;
  sigemptyset(&signals);
  sigaddset(&signals, SIGTERM);
  sigaddset(&signals, SIGINT);
  pthread_sigmask(SIG_BLOCK, &signals, nullptr);
  ::signal(SIGPIPE, SIG_IGN);

  service::Station station(config);
  service::ApiHandler handler(station, token);
  // The API's sockets are bound before any instrument is touched: a daemon that cannot serve
  // (another one listens there) leaves the instruments alone.
  service::ServerOptions so;
  so.unix_socket = config.api.unix_socket;
  so.tcp_host = config.api.tcp_host;
  so.tcp_port = config.api.tcp_port;
  so.token_configured = !token.empty();
  auto server = service::ApiServer::create(handler, so);
  // The API serves while the instruments connect: an instrument that does not answer holds the
  // connect for its timeouts, and a client meanwhile hears "busy: instrument connect is
  // running" instead of waiting unanswered. The "listening" line and READY=1 still come after.
  // Everything that serves starts inside the busy state, so no job can start beside the connect;
  // the pages first (they set the handler's event watcher, which must be in place before anything
  // serves, and a taken port then stops the daemon before any instrument is touched).
  std::unique_ptr<web::WebServer> pages;
  std::thread io;
  struct IoGuard {   // a throw once the io thread runs stops it first
    service::ApiServer& server;
    std::thread& io;
    ~IoGuard() {
      if (!io.joinable()) return;
      server.stop();
      io.join();
    }
  } io_guard{*server, io};
  handler.run_busy("instrument connect", [&] {
    if (config.web.port != 0) pages = std::make_unique<web::WebServer>(handler, station, web::WebOptions{config.web.host, config.web.port, token});
    io = std::thread([&] { server->run(); });
    station.connect_instruments();
  });

  const std::string web_address = pages ? "http://" + pages->address() + "/" : "";
  std::cout << "listening unix=" << server->unix_path() << " tcp=" << server->tcp_address() << " web=" << web_address
            << std::endl;
  spdlog::info("listening unix={} tcp={} web={}", server->unix_path(), server->tcp_address(), web_address);
  service::sd_notify_state("READY=1");
  // Under WatchdogSec=: pings only while the sweep engine makes progress (watchdog.hpp).
  std::optional<service::WatchdogNotifier> watchdog;
  if (auto period = service::watchdog_period_from_environment()) {
    spdlog::info("watchdog: {} ms; pinging while the sweep engine makes progress", period->count() / 1000);
    watchdog.emplace(service::engine_heartbeat(), *period);
  }

  int sig = 0;
  sigwait(&signals, &sig);
  spdlog::info("signal {} received: stopping", sig);
  service::sd_notify_state("STOPPING=1");
  server->stop_accepting();
  if (args.on_stop == "finish") {
    handler.finish_and_stop();
  }
  handler.stop("daemon stopping");
  if (pages) pages->stop();
  server->stop();
  io.join();
  server.reset();
  station.shutdown();
  spdlog::info("stopped");
  return 0;
}

}  // namespace

int main(int argc, char** argv) {
  const Args args = parse_args(argc, argv);
  int code = 1;
  try {
    code = run(args);
  } catch (const drivers::ConfigError& e) {
    std::cerr << "echolined: " << e.what() << "\n";
    code = 2;
  } catch (const std::exception& e) {
    std::cerr << "echolined: " << e.what() << "\n";
    // Into the log file too once there is one; before that (a second daemon on the same store)
    // stderr alone: stdout carries the "listening" line scripts read.
    if (logging_started) spdlog::error("{}", e.what());
    code = 1;
  }
  spdlog::shutdown();
  return code;
}
