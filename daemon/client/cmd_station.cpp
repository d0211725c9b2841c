// `echoline station`: wires the operator console to the daemon, the terminal and the store.
#include <unistd.h>

#include <cstdlib>
#include <iostream>

#include <fmt/format.h>

#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/console.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/run_store.hpp"
#include "drivers/config_error.hpp"
#include "drivers/whole_number.hpp"

namespace echoline::client {

namespace {

constexpr const char* kHelp =
    "usage: echoline station [--lot LOT] [--operator NAME] [--reconnect-timeout SECONDS]\n"
    "                        [connection options]\n"
    "\n"
    "The operator console. Shows the station, recipe, calibration state and the safety notes,\n"
    "then asks \"Scan serial:\" again and again: scan a unit's barcode (or type the serial and\n"
    "press Enter) with the unit connected to the test port. The console tests it and shows\n"
    "PASS / FAIL / INCONCLUSIVE / ABORTED in large letters, the reason, and what to do with the\n"
    "unit. When calibration is due it asks for the OPEN, SHORT and LOAD standards in turn.\n"
    "Type q (or quit), or end the input, to stop; a summary with the yield follows.\n"
    "\n"
    "Input from a pipe works too (a scripted scanner): serials line by line, empty lines\n"
    "ignored, a \"y\" line answers a retest question, an empty line confirms a standard.\n"
    "\n"
    "When the station service stops answering (a crash or a restart), the console says so,\n"
    "retries and, once the service is back, carries on at the serial prompt. The unit whose\n"
    "test was cut off was NOT judged: scan it again (with piped input it is tested again by\n"
    "itself, once). Its cut-off run is stored as aborted or not at all.\n"
    "\n"
    "options:\n"
    "  --lot LOT             lot name stored with every run\n"
    "  --operator NAME       operator name stored with every run\n"
    "  --sim-fixture ADDR    SIMULATOR ONLY, for demos and CI: echoline-sim's fixture control\n"
    "                        port (tcp://HOST:PORT, the role=control endpoint). Before each\n"
    "                        measurement the console connects the scanned unit or the prompted\n"
    "                        standard there, as an operator does by hand.\n"
    "  --no-color            no colour even on a terminal (NO_COLOR in the environment also works)\n"
    "  --reconnect-timeout SECONDS\n"
    "                        when the link to the station service (echolined) is lost, retry\n"
    "                        after 1 s, 2 s, 4 s, then every 5 s for this long, then end with\n"
    "                        exit code 3. 0 = keep retrying until it is back. Default: 0 when\n"
    "                        the input is a terminal, 60 when it is a pipe or file.\n"
    "\n"
    "exit: 0 at a normal end whatever the verdicts; 3 the station service stayed away; 4 a unit\n"
    "scanned in the session was left untested because of the instruments (listed in the summary)\n"
    "\n"
    "RF exposure: during a test the antenna under test radiates the source power.\n";

// Points of a stored run for the console's plot, read from the station's store file.
Result<std::vector<PlotPoint>> load_points(std::unique_ptr<store::RunStore>& store, const std::filesystem::path& file,
                                           const std::string& run_id) {
  if (!store) {
    std::error_code ec;
    if (file.empty() || !std::filesystem::exists(file, ec)) {
      return make_error(ErrorKind::storage, "run store not found on this computer (give --config FILE)");
    }
    auto s = store::RunStore::open_read_only(file);   // the console never writes the live store
    if (!s) return s.error();
    store = std::move(s.value());
  }
  auto run = store->load_run(run_id);
  if (!run) return run.error();
  std::vector<PlotPoint> pts;
  for (const auto& p : run->points) pts.push_back({p.frequency_hz, p.return_loss_db});
  return pts;
}

}  // namespace

int cmd_station(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--lot", "--operator", "--sim-fixture", "--reconnect-timeout"});
  Args args(argv, "station", values, {"--help", "--no-color"}, 0);
  if (args.flag("--help")) {
    std::cout << kHelp << "\n" << kConnectionHelp;
    return kExitOk;
  }
  ConsoleOptions options;
  options.lot = args.get_or("--lot", "");
  options.operator_name = args.get_or("--operator", "");
  options.sim_fixture = args.get_or("--sim-fixture", "");
  if (!options.sim_fixture.empty()) {
    std::string host;
    int port = 0;
    if (options.sim_fixture.rfind("tcp://", 0) != 0 || !split_host_port(options.sim_fixture, host, port)) {
      args.usage_error(fmt::format("--sim-fixture {}: expected tcp://HOST:PORT with a port from 1 to 65535",
                                   options.sim_fixture));
    }
  }
  const bool input_is_tty = ::isatty(STDIN_FILENO) == 1;
  options.reconnect_timeout = Seconds{input_is_tty ? 0 : 60};
  if (auto t = args.get("--reconnect-timeout")) {
    const auto seconds = drivers::parse_whole_number(*t, 0, 7 * 24 * 3600);
    if (!seconds) args.usage_error(drivers::whole_number_error("--reconnect-timeout", *t, 0, 7 * 24 * 3600, "seconds; 0 = forever"));
    options.reconnect_timeout = Seconds{*seconds};
  }
  options.output_is_tty = ::isatty(STDOUT_FILENO) == 1;
  const char* no_color = std::getenv("NO_COLOR");
  const char* term = std::getenv("TERM");
  options.colour = options.output_is_tty && !args.flag("--no-color") && !(no_color && *no_color) &&
                   !(term && std::string(term) == "dumb");

  auto api = connect_daemon(args, "operator", "echoline station");

  // The plot needs the run's points (the store on this computer) and the recipe's limit line.
  PlotSource plot;
  std::optional<drivers::StationConfig> config;
  try {
    config = find_station_config(args, false);
  } catch (const drivers::ConfigError&) {
    config.reset();
  }
  if (auto st = api->call("status", nlohmann::json::object()); st && st->ok) {
    const std::string recipe_path = st->result.value("/recipe/path"_json_pointer, std::string());
    try {
      if (!recipe_path.empty()) {
        const core::Recipe recipe = core::load_recipe(recipe_path);
        for (const auto& seg : recipe.limits.mask) plot.limits.push_back({seg.start_hz, seg.stop_hz, seg.min_return_loss_db});
      }
    } catch (const std::exception&) {
      // Recipe file not readable here (daemon on another computer): plot without the limit line.
    }
  }
  if (config) options.serial_pattern = config->serial_pattern;
  auto store_holder = std::make_shared<std::unique_ptr<store::RunStore>>();
  const std::filesystem::path file = config ? store_file(*config) : std::filesystem::path();
  plot.points = [store_holder, file](const std::string& run_id) { return load_points(*store_holder, file, run_id); };

  LineInput input(std::cin, input_is_tty);
  Console console(*api, input, std::cout, options, plot);
  return console.run();
}

}  // namespace echoline::client
