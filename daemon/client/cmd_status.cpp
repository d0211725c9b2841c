// `echoline status` and `echoline cal status|history`.
#include <iostream>
#include <set>

#include <fmt/format.h>

#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/store/run_store.hpp"

namespace echoline::client {

using nlohmann::json;

namespace {

std::string s(const json& j, const char* key) {
  auto it = j.find(key);
  return it != j.end() && it->is_string() ? it->get<std::string>() : std::string();
}

void print_calibration(const json& c) {
  if (!c.value("present", false)) {
    std::cout << "calibration: none\n";
  } else {
    std::cout << fmt::format("calibration: {} ({}), created {}, min directivity {:.1f} dB, {} units since\n", s(c, "id"),
                             c.value("valid", false) ? "valid" : "NOT valid", s(c, "created_utc"),
                             c.value("min_directivity_db", 0.0), c.value("units_since", 0));
    if (c.contains("warnings")) {
      for (const auto& w : c["warnings"]) std::cout << "  warning: " << (w.is_string() ? w.get<std::string>() : w.dump()) << "\n";
    }
  }
  std::cout << "calibration due: " << (c.value("due", false) ? "YES - " + s(c, "reason") : std::string("no")) << "\n";
  if (c.contains("check") && c["check"].is_object()) {
    const json& k = c["check"];
    std::cout << fmt::format("check standard: {} every {} units, {} units since, due: {}\n", s(k, "standard"),
                             k.value("every_units", 0), k.value("units_since", 0), k.value("due", false) ? "yes" : "no");
  }
}

constexpr const char* kStatusHelp =
    "usage: echoline status [connection options]\n\n"
    "Shows the daemon's station, recipe, instruments (healthy or not), calibration and what is\n"
    "running.\n"
    "exit: 0 every instrument ready, 4 an instrument is NOT READY (the station cannot test),\n"
    "      3 the daemon cannot be reached, 2 usage error\n\n";

constexpr const char* kCalHelp =
    "usage: echoline cal status [connection options]\n"
    "       echoline cal history [--store FILE] [--config FILE]\n\n"
    "status   the calibration in use: valid or not, age, minimum directivity, due or not and why\n"
    "history  the calibrations the stored runs used, oldest first, from the run store file\n"
    "         (--store FILE, default <data_dir>/<station>.sqlite of the station config)\n"
    "         Calibrations no run used yet are not listed (except the latest).\n"
    "         Calibrating is done from the operator console (echoline station).\n\n";

}  // namespace

int cmd_status(const Argv& argv) {
  Args args(argv, "status", kConnectionOptions, {"--help"}, 0);
  if (args.flag("--help")) {
    std::cout << kStatusHelp << kConnectionHelp;
    return kExitOk;
  }
  auto api = connect_daemon(args, "operator", "echoline status");
  ApiReply r = require_link(api->call("status", json::object()), "status");
  require_ok(r, "status");
  const json& st = r.result;
  std::cout << "station: " << s(st, "station") << " (echolined " << s(st, "version")
            << (s(st, "commit").empty() ? "" : " " + s(st, "commit")) << ")\n";
  if (st.contains("recipe")) {
    const json& rc = st["recipe"];
    std::cout << fmt::format("recipe: {} {} ({} points, {} acceptance) {}\n", s(rc, "name"), s(rc, "version"),
                             rc.value("points", 0), s(rc, "decision_rule"), s(rc, "path"));
  }
  bool healthy = true;
  if (st.contains("instruments")) {
    for (const auto& i : st["instruments"]) {
      const bool ok = i.value("healthy", false);
      healthy = healthy && ok;
      std::cout << fmt::format("{}: {} {} {} [{}]{}\n", s(i, "role"), s(i, "name"), s(i, "address"), s(i, "identity"),
                               ok ? "ok" : "NOT READY", s(i, "last_error").empty() ? "" : " " + s(i, "last_error"));
    }
  }
  if (st.contains("calibration")) print_calibration(st["calibration"]);
  std::cout << "busy: " << (st.contains("busy") && !st["busy"].is_null() ? st["busy"].dump() : std::string("no")) << "\n";
  return healthy ? kExitOk : kExitInstrument;
}

int cmd_cal(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert("--store");
  Args args(argv, "cal", values, {"--help"}, 1);
  if (args.flag("--help") || args.positional().empty()) {
    std::cout << kCalHelp << kConnectionHelp;
    return args.flag("--help") ? kExitOk : kExitUsage;
  }
  const std::string what = args.positional().front();
  if (what == "status") {
    auto api = connect_daemon(args, "operator", "echoline cal");
    ApiReply r = require_link(api->call("cal.status", json::object()), "cal status");
    require_ok(r, "cal status");
    print_calibration(r.result);
    return kExitOk;
  }
  if (what != "history") args.usage_error(fmt::format("unknown cal command \"{}\" (status, history)", what));
  std::filesystem::path file;
  if (auto st = args.get("--store")) {
    file = *st;
  } else {
    file = store_file(*find_station_config(args, true));
  }
  std::error_code ec;
  if (!std::filesystem::exists(file, ec)) throw CliExit(kExitStorage, fmt::format("cal history: {}: no such store file", file.string()));
  auto store = store::RunStore::open_read_only(file);
  if (!store) throw CliExit(kExitStorage, "cal history: " + store.error().message);
  auto runs = (*store)->runs_between("0000", "9999", false);
  if (!runs) throw CliExit(kExitStorage, "cal history: " + runs.error().message);
  std::vector<std::string> ids;
  std::map<std::string, int> uses;
  for (const auto& r : *runs) {
    if (r.calibration_id.empty()) continue;
    if (uses[r.calibration_id]++ == 0) ids.push_back(r.calibration_id);
  }
  auto latest = (*store)->latest_calibration();
  if (latest && latest->has_value() && !uses.count((*latest)->id)) ids.push_back((*latest)->id);
  if (ids.empty()) {
    std::cout << "no calibrations stored in " << file.string() << "\n";
    return kExitNegative;
  }
  std::cout << fmt::format("{:<44} {:<26} {:<9} {:>10} {:>6}  {}\n", "calibration", "created (UTC)", "valid", "min D dB",
                           "runs", "recipe");
  for (const auto& id : ids) {
    auto c = (*store)->load_calibration(id);
    if (!c || !c->has_value()) {
      std::cout << fmt::format("{:<44} (not found in the store)\n", id);
      continue;
    }
    const auto& cal = c->value();
    std::cout << fmt::format("{:<44} {:<26} {:<9} {:>10.1f} {:>6}  {} {}\n", cal.id, cal.created_utc,
                             cal.valid ? "yes" : "NO", cal.min_directivity_db, uses[id], cal.recipe.name, cal.recipe.version);
  }
  return kExitOk;
}

}  // namespace echoline::client
