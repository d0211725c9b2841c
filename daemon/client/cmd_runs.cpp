// `echoline runs`, `echoline report`, `echoline export`: through the daemon's API, or offline
// from a run store file with --store FILE.
#include <filesystem>
#include <iostream>
#include <set>

#include <fmt/format.h>

#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/run_table.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/export.hpp"
#include "daemon/store/lot_report.hpp"
#include "daemon/store/run_store.hpp"

namespace echoline::client {

using nlohmann::json;

namespace {

constexpr const char* kRunsHelp =
    "usage: echoline runs --serial SERIAL | --lot LOT [--store FILE] [connection options]\n\n"
    "Lists the stored runs of one unit or one lot, oldest first: time, run id, verdict, failure\n"
    "class, resonance (MHz), depth (dB) and the reason. Through the daemon, or offline from a\n"
    "run store file with --store FILE. A lot listing ends with its yield.\n\n"
    "exit: 0 runs listed, 1 nothing stored under that key, 3 daemon unreachable, 5 storage error\n\n";

constexpr const char* kReportHelp =
    "usage: echoline report --lot LOT --out FILE.html [--store FILE --recipe FILE] [connection options]\n\n"
    "Writes the lot's self-contained HTML report (yield, failure Pareto, every unit's return loss,\n"
    "resonance spread, calibrations used, failed units) and prints its path and the lot's yield.\n"
    "Through the daemon (engineer role; the daemon writes FILE on its own computer), or offline\n"
    "from a run store file with --store FILE (the limit lines come from --recipe FILE, default the\n"
    "station config's recipe).\n\n"
    "exit: 0 written, 1 no runs for that lot, 2 usage, 3 daemon unreachable, 5 storage error\n\n";

constexpr const char* kExportHelp =
    "usage: echoline export --scope run|serial|lot --key KEY --format csv|json --out FILE\n"
    "                       [--store FILE] [connection options]\n\n"
    "Exports stored runs with every point: CSV (one row per point, RFC 4180) or JSON. KEY is a\n"
    "run id, a serial or a lot. Through the daemon (engineer role; it writes FILE on its own\n"
    "computer) or offline from a run store file with --store FILE.\n\n"
    "exit: 0 written, 1 nothing stored under KEY, 2 usage, 3 daemon unreachable, 5 storage error\n\n";

std::unique_ptr<store::RunStore> open_store(const std::string& file, const std::string& what) {
  std::error_code ec;
  if (!std::filesystem::exists(file, ec)) throw CliExit(kExitStorage, fmt::format("{}: {}: no such store file", what, file));
  auto s = store::RunStore::open(file);
  if (!s) throw CliExit(kExitStorage, fmt::format("{}: {}", what, s.error().message));
  return std::move(s.value());
}

void print_yield(const std::string& lot, const json& runs) {
  const LotYield y = lot_yield(runs);
  std::cout << fmt::format("lot {}: {} units, {} judged, {} passed, yield {:.1f} %\n", lot, y.units, y.judged, y.passed,
                           100 * y.yield);
}

// Runs of a serial or a lot as API run objects, from the daemon or a store.
json fetch_runs(const Args& args, const std::string& what, bool by_serial, const std::string& key) {
  if (auto file = args.get("--store")) {
    auto st = open_store(*file, what);
    auto runs = by_serial ? st->history(key) : st->lot_runs(key, false);
    if (!runs) throw CliExit(kExitStorage, fmt::format("{}: {}", what, runs.error().message));
    json list = json::array();
    for (const auto& r : *runs) list.push_back(store::run_to_json(r, false));
    return list;
  }
  auto api = connect_daemon(args, "operator", "echoline " + what);
  ApiReply reply = require_link(api->call(by_serial ? "runs.history" : "runs.lot", {{by_serial ? "serial" : "lot", key}}), what);
  require_ok(reply, what);
  return reply.result.value("runs", json::array());
}

}  // namespace

int cmd_runs(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--serial", "--lot", "--store"});
  Args args(argv, "runs", values, {"--help"}, 0);
  if (args.flag("--help")) {
    std::cout << kRunsHelp << kConnectionHelp;
    return kExitOk;
  }
  const auto serial = args.get("--serial");
  const auto lot = args.get("--lot");
  if (!serial == !lot) args.usage_error("give exactly one of --serial SERIAL or --lot LOT");
  const json runs = fetch_runs(args, "runs", serial.has_value(), serial ? *serial : *lot);
  if (runs.empty()) {
    std::cout << "no runs stored for " << (serial ? "serial " + *serial : "lot " + *lot) << "\n";
    return kExitNegative;
  }
  std::cout << run_table(runs);
  if (lot) print_yield(*lot, runs);
  return kExitOk;
}

int cmd_report(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--lot", "--out", "--store", "--recipe"});
  Args args(argv, "report", values, {"--help"}, 0);
  if (args.flag("--help")) {
    std::cout << kReportHelp << kConnectionHelp;
    return kExitOk;
  }
  const auto lot = args.get("--lot");
  const auto out = args.get("--out");
  if (!lot || !out) args.usage_error("--lot LOT and --out FILE.html are required");
  const std::string path = std::filesystem::absolute(*out).string();
  if (auto file = args.get("--store")) {
    auto st = open_store(*file, "report");
    auto runs = st->lot_runs(*lot, true);
    if (!runs) throw CliExit(kExitStorage, "report: " + runs.error().message);
    if (runs->empty()) throw CliExit(kExitNegative, fmt::format("report: no runs stored for lot \"{}\"", *lot));
    std::string recipe_file = args.get_or("--recipe", "");
    if (recipe_file.empty()) recipe_file = find_station_config(args, true)->recipe.string();
    const core::Recipe recipe = core::load_recipe(recipe_file);
    std::vector<core::CalibrationRecord> cals;
    std::set<std::string> ids;
    for (const auto& r : *runs) {
      if (!r.calibration_id.empty() && ids.insert(r.calibration_id).second) {
        auto c = st->load_calibration(r.calibration_id);
        if (c && c->has_value()) cals.push_back(c->value());
      }
    }
    const std::string html = store::build_lot_report(*lot, *runs, cals, recipe.limits, {});
    if (Status s = store::write_text_file(path, html); !s) throw CliExit(kExitStorage, "report: " + s.error().message);
    json list = json::array();
    for (const auto& r : *runs) list.push_back(store::run_to_json(r, false));
    print_yield(*lot, list);
    std::cout << "report: " << path << "\n";
    return kExitOk;
  }
  auto api = connect_daemon(args, "engineer", "echoline report");
  ApiReply reply = require_link(api->call("report.lot", {{"lot", *lot}, {"path", path}}, Millis{120000}), "report");
  require_ok(reply, "report");
  ApiReply runs = require_link(api->call("runs.lot", {{"lot", *lot}}), "report");
  require_ok(runs, "report");
  print_yield(*lot, runs.result.value("runs", json::array()));
  std::cout << "report: " << reply.result.value("path", path) << "\n";
  return kExitOk;
}

int cmd_export(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--scope", "--key", "--format", "--out", "--store"});
  Args args(argv, "export", values, {"--help"}, 0);
  if (args.flag("--help")) {
    std::cout << kExportHelp << kConnectionHelp;
    return kExitOk;
  }
  const std::string scope = args.get_or("--scope", "");
  const std::string key = args.get_or("--key", "");
  const std::string format = args.get_or("--format", "");
  const std::string out = args.get_or("--out", "");
  if (scope != "run" && scope != "serial" && scope != "lot") args.usage_error("--scope must be run, serial or lot");
  if (format != "csv" && format != "json") args.usage_error("--format must be csv or json");
  if (key.empty() || out.empty()) args.usage_error("--key KEY and --out FILE are required");
  const std::string path = std::filesystem::absolute(out).string();
  if (auto file = args.get("--store")) {
    auto st = open_store(*file, "export");
    std::vector<core::RunResult> runs;
    if (scope == "run") {
      auto r = st->load_run(key);
      if (!r) throw CliExit(kExitNegative, "export: " + r.error().message);
      runs.push_back(std::move(r.value()));
    } else {
      auto r = scope == "serial" ? st->history(key, true) : st->lot_runs(key, true);
      if (!r) throw CliExit(kExitStorage, "export: " + r.error().message);
      runs = std::move(r.value());
    }
    if (runs.empty()) throw CliExit(kExitNegative, fmt::format("export: no runs stored for {} \"{}\"", scope, key));
    std::string text = format == "csv"       ? store::csv_points(runs)
                       : scope == "run"      ? store::json_run(runs.front())
                       : scope == "serial"   ? store::json_serial(key, runs)
                                             : store::json_lot(key, runs);
    if (Status s = store::write_text_file(path, text); !s) throw CliExit(kExitStorage, "export: " + s.error().message);
    std::cout << fmt::format("exported {} run{} to {}\n", runs.size(), runs.size() == 1 ? "" : "s", path);
    return kExitOk;
  }
  auto api = connect_daemon(args, "engineer", "echoline export");
  ApiReply reply = require_link(
      api->call("export", {{"scope", scope}, {"key", key}, {"format", format}, {"path", path}}, Millis{120000}), "export");
  require_ok(reply, "export");
  const int n = reply.result.value("runs", 0);
  std::cout << fmt::format("exported {} run{} to {}\n", n, n == 1 ? "" : "s", reply.result.value("path", path));
  return kExitOk;
}

}  // namespace echoline::client
