// `echoline status` and `echoline cal status|history`.
#include <chrono>
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
    "usage: echoline status [--json] [connection options]\n\n"
    "Shows the daemon's station, recipe, instruments (healthy or not), calibration, forwarding to\n"
    "the central database (outbox depth, oldest unforwarded run, last successful forward) and\n"
    "what is running. While the station is idle, an instrument that is not ready is tried once\n"
    "more first (a cable plugged back in shows as ready without starting a test).\n"
    "--json   one JSON object instead: the daemon's status reply (daemon/service/API.md, status)\n"
    "         with \"ready\": true when every instrument is healthy; same exit codes\n"
    "exit: 0 every instrument ready, 4 an instrument is NOT READY (the station cannot test),\n"
    "      3 the daemon cannot be reached, 2 usage error\n\n";

constexpr const char* kCalHelp =
    "usage: echoline cal status [--json] [connection options]\n"
    "       echoline cal history [--json] [--store FILE] [--config FILE]\n\n"
    "status   the calibration in use: valid or not, age, minimum directivity, due or not and why\n"
    "history  the calibrations the stored runs used, oldest first, from the run store file\n"
    "         (--store FILE, default <data_dir>/<station>.sqlite of the station config)\n"
    "         Calibrations no run used yet are not listed (except the latest).\n"
    "         Calibrating is done from the operator console (echoline station).\n"
    "--json   one JSON object instead: status prints the daemon's cal.status reply; history\n"
    "         prints {\"store\": FILE, \"calibrations\": [{\"id\", \"created_utc\", \"valid\",\n"
    "         \"min_directivity_db\", \"runs\", \"recipe\": {\"name\", \"version\"}}, ...]}\n"
    "exit: 0 shown, 1 no calibration stored (history), 2 usage, 3 daemon unreachable,\n"
    "      5 storage error\n\n";

// The daemon's busy object in words: "no", "test of WH915A-0007 (point 12 of 221)",
// "calibration (waiting for SHORT to be connected)", "probe", "instrument connect".
std::string busy_text(const json& b) {
  if (!b.is_object()) return "no";
  std::string text = b.value("kind", "job");
  if (text == "test") text += " of " + b.value("serial", std::string("?"));
  if (b.value("waiting", false) && b.contains("standard")) {
    text += fmt::format(" (waiting for {} to be connected)", b.value("standard", std::string("?")));
  } else if (b.contains("point") && b.contains("of")) {
    text += fmt::format(" (point {} of {}{})", b.value("point", 0), b.value("of", 0),
                        b.contains("standard") ? ", " + b.value("standard", std::string()) : std::string());
  }
  return text;
}

}  // namespace

int cmd_status(const Argv& argv) {
  Args args(argv, "status", kConnectionOptions, {"--help", "--json"}, 0);
  if (args.flag("--help")) {
    std::cout << kStatusHelp << kConnectionHelp;
    return kExitOk;
  }
  auto api = connect_daemon(args, "operator", "echoline status");
  ApiReply r = require_link(api->call("status", json::object()), "status");
  require_ok(r, "status");
  if (probe_when_idle(*api, r.result)) {
    r = require_link(api->call("status", json::object()), "status");
    require_ok(r, "status");
  }
  const json& st = r.result;
  const bool healthy = all_healthy(st);
  if (args.flag("--json")) {
    json out = st;
    out["ready"] = healthy;
    std::cout << out.dump(2) << "\n";
    return healthy ? kExitOk : kExitInstrument;
  }
  std::cout << "station: " << s(st, "station") << " (echolined " << s(st, "version")
            << (s(st, "commit").empty() ? "" : " " + s(st, "commit")) << ")\n";
  if (st.contains("recipe")) {
    const json& rc = st["recipe"];
    std::cout << fmt::format("recipe: {} {} ({} points, {} acceptance) {}\n", s(rc, "name"), s(rc, "version"),
                             rc.value("points", 0), s(rc, "decision_rule"), s(rc, "path"));
  }
  if (st.contains("instruments")) {
    for (const auto& i : st["instruments"]) {
      const bool ok = i.value("healthy", false);
      std::cout << fmt::format("{}: {} {} {} [{}]{}\n", s(i, "role"), s(i, "name"), s(i, "address"), s(i, "identity"),
                               ok ? "ok" : "NOT READY", s(i, "last_error").empty() ? "" : " " + s(i, "last_error"));
    }
  }
  if (st.contains("calibration")) print_calibration(st["calibration"]);
  if (st.contains("forwarding") && st["forwarding"].is_object()) {
    const json& f = st["forwarding"];
    if (!f.value("configured", false)) {
      // Runs are not queued without a central database; one configured later gets them queued once.
      std::cout << fmt::format("central database: none configured; runs stay in this station's store{}{}\n",
                               s(f, "unqueued_since_utc").empty()
                                   ? ""
                                   : " (not queued for forwarding since " + s(f, "unqueued_since_utc") +
                                         "; configuring a central database forwards them)",
                               f.value("outbox_depth", 0LL) ? fmt::format(", {} runs still waiting in the outbox",
                                                                          f.value("outbox_depth", 0LL))
                                                            : "");
    } else {
      std::cout << fmt::format("central database: {} [{}]{}\n", s(f, "target"), s(f, "state"),
                               s(f, "last_error").empty() ? "" : " " + s(f, "last_error"));
      std::cout << fmt::format("outbox: {} runs waiting{}{}; last forward {}{}\n", f.value("outbox_depth", 0LL),
                               s(f, "oldest_unforwarded_run").empty()
                                   ? ""
                                   : fmt::format(", oldest {} (committed {})", s(f, "oldest_unforwarded_run"),
                                                 s(f, "oldest_unforwarded_utc")),
                               f.value("outbox_refused", 0LL) ? fmt::format(", {} REFUSED (see the log)", f.value("outbox_refused", 0LL)) : "",
                               s(f, "last_forward_utc").empty() ? "never" : s(f, "last_forward_utc"),
                               s(f, "last_forwarded_run").empty() ? "" : " (" + s(f, "last_forwarded_run") + ")");
    }
  }
  std::cout << "busy: " << busy_text(st.contains("busy") ? st["busy"] : json()) << "\n";
  return healthy ? kExitOk : kExitInstrument;
}

int cmd_cal(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert("--store");
  Args args(argv, "cal", values, {"--help", "--json"}, 1);
  const bool as_json = args.flag("--json");
  if (args.flag("--help") || args.positional().empty()) {
    std::cout << kCalHelp << kConnectionHelp;
    return args.flag("--help") ? kExitOk : kExitUsage;
  }
  const std::string what = args.positional().front();
  if (what == "status") {
    auto api = connect_daemon(args, "operator", "echoline cal");
    ApiReply r = require_link(api->call("cal.status", json::object()), "cal status");
    require_ok(r, "cal status");
    if (as_json) std::cout << r.result.dump(2) << "\n";
    else print_calibration(r.result);
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
    if (as_json) std::cout << json{{"store", file.string()}, {"calibrations", json::array()}}.dump(2) << "\n";
    else std::cout << "no calibrations stored in " << file.string() << "\n";
    return kExitNegative;
  }
  if (as_json) {
    json list = json::array();
    for (const auto& id : ids) {
      auto c = (*store)->load_calibration(id);
      if (!c || !c->has_value()) {
        list.push_back({{"id", id}, {"found", false}, {"runs", uses[id]}});
        continue;
      }
      const auto& cal = c->value();
      list.push_back({{"id", cal.id}, {"found", true}, {"created_utc", cal.created_utc}, {"valid", cal.valid},
                      {"min_directivity_db", cal.min_directivity_db}, {"runs", uses[id]},
                      {"recipe", {{"name", cal.recipe.name}, {"version", cal.recipe.version}}}});
    }
    std::cout << json{{"store", file.string()}, {"calibrations", list}}.dump(2) << "\n";
    return kExitOk;
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
