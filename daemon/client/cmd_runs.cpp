// `echoline runs`, `echoline report`, `echoline export`: through the daemon's API (reports and
// exports come back in the reply and this client writes the file), or offline from a run store
// file with --store FILE, opened read-only.
#include <unistd.h>

#include <filesystem>
#include <iostream>
#include <optional>
#include <set>

#include <fmt/format.h>

#include "daemon/client/central_access.hpp"
#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/client/run_table.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/store/documents.hpp"
#include "daemon/store/export.hpp"
#include "daemon/store/run_store.hpp"
#include "daemon/store/serial.hpp"

namespace echoline::client {

using nlohmann::json;

namespace {

constexpr const char* kRunsHelp =
    "usage: echoline runs --serial SERIAL | --lot LOT [--json]\n"
    "                     [--store FILE | --db CONNINFO|FILE | --central] [connection options]\n\n"
    "Lists the stored runs of one unit or one lot, oldest first: time, serial (a lot only), run id,\n"
    "verdict, failure class, resonance (MHz), depth (dB) and the reason. Through the daemon, or\n"
    "offline from a run store file with --store FILE. A lot listing ends with its yield. From the\n"
    "central database (--db, --central) it lists every station's runs, with a station column, and\n"
    "marks a run of a unit that was tested on another bench before as a retest on another bench.\n"
    "--json   one JSON object instead: {\"serial\" or \"lot\": KEY, \"runs\": [API run objects,\n"
    "         oldest first], and for a lot \"yield\": {\"units\", \"judged\", \"passed\", \"yield\"}}\n"
    "         (yield as a fraction, the store's definition)\n\n"
    "exit: 0 runs listed, 1 nothing stored under that key, 3 daemon unreachable, 5 storage error\n\n";

constexpr const char* kReportHelp =
    "usage: echoline report --lot LOT --out FILE.html|- [--store FILE | --db CONNINFO|FILE | --central]\n"
    "                       [--recipe FILE] [connection options]\n\n"
    "Writes the lot's self-contained HTML report (yield, failure Pareto, every unit's return loss,\n"
    "resonance spread, calibrations used, failed units) and prints its path and the lot's yield.\n"
    "Through the daemon (engineer role): the daemon sends the report back and this command writes\n"
    "FILE on this computer; --out - writes it to standard output (the yield line then goes to\n"
    "standard error). Offline from a run store file with --store FILE, opened read-only. From the\n"
    "central database (--db, --central) the report spans every station that tested the lot, with\n"
    "yield by station, operator and calibration and each station's mean resonance and return loss\n"
    "against the others.\n"
    "Limit lines are those of the recipe stored with the runs (by content hash); the report lists\n"
    "every recipe version the lot's runs used and says so when there is more than one. --recipe FILE\n"
    "(default the station config's recipe) stands in only for runs whose recipe text is not stored,\n"
    "and the report then names it.\n\n"
    "exit: 0 written, 1 no runs for that lot, 2 usage (also an --out path that cannot be written),\n"
    "3 daemon unreachable, 5 storage error\n\n";

constexpr const char* kExportHelp =
    "usage: echoline export --scope run|serial|lot --key KEY | --run RUN_ID\n"
    "                       --format csv|runs-csv|json|s1p --out FILE|- [--store FILE] [connection options]\n\n"
    "Exports stored runs. KEY is a run id, a serial or a lot; --run RUN_ID is short for\n"
    "--scope run --key RUN_ID. Formats:\n"
    "  csv       one row per point with the return loss and its bounds (RFC 4180)\n"
    "  runs-csv  one row per run: identity, recipe, verdict, reason, metrics, trim, timings\n"
    "  json      every field and point of each run\n"
    "  s1p       Touchstone v1 one-port of one run (--scope run): S11 in dB = -return loss;\n"
    "            a scalar station measures no phase, so every angle is 0 (the header says so)\n"
    "Through the daemon (engineer role): the daemon sends the text back and this command writes\n"
    "FILE on this computer; --out - writes it to standard output. Offline from a run store file\n"
    "with --store FILE, opened read-only, or from the central database (--db, --central).\n\n"
    "exit: 0 written, 1 nothing stored under KEY, 2 usage (also an --out path that cannot be\n"
    "written), 3 daemon unreachable, 5 storage error\n\n";

// Replies that carry a whole report or export may be large (a 10 000-run lot report is ~30 MB).
constexpr std::size_t kMaxDocumentReplyBytes = std::size_t{512} << 20;

// Writes a document where --out says: "-" is standard output, anything else a file written
// atomically on this computer. Returns the text to show for where it went.
// An --out path that cannot be written is the user's to correct (exit 2, usage), found before any
// work is done: its folder must exist and be writable, and it must not be a folder itself.
void check_output_path(const std::string& out, const std::string& what) {
  if (out == "-") return;
  std::error_code ec;
  const std::filesystem::path path = std::filesystem::absolute(out, ec);
  const std::filesystem::path folder = path.parent_path();
  auto refuse = [&](const std::string& why) {
    throw CliExit(kExitUsage, fmt::format("{}: --out {}: {}", what, out, why));
  };
  if (std::filesystem::is_directory(path, ec)) refuse("is a folder; give a file name in it");
  if (!std::filesystem::exists(folder, ec)) refuse(fmt::format("folder {} does not exist", folder.string()));
  if (!std::filesystem::is_directory(folder, ec)) refuse(fmt::format("{} is not a folder", folder.string()));
  if (::access(folder.c_str(), W_OK) != 0) refuse(fmt::format("folder {} is not writable for this user", folder.string()));
}

std::string write_output(const std::string& out, const std::string& content, const std::string& what) {
  if (out == "-") {
    std::cout.write(content.data(), static_cast<std::streamsize>(content.size()));
    std::cout.flush();
    if (!std::cout) throw CliExit(kExitStorage, fmt::format("{}: writing to standard output failed", what));
    return "standard output";
  }
  const std::string path = std::filesystem::absolute(out).string();
  if (Status s = store::write_text_file(path, content); !s) throw CliExit(kExitStorage, what + ": " + s.error().message);
  return path;
}

std::unique_ptr<store::RunStore> open_store(const std::string& file, const std::string& what) {
  std::error_code ec;
  if (!std::filesystem::exists(file, ec)) throw CliExit(kExitStorage, fmt::format("{}: {}: no such store file", what, file));
  auto s = store::RunStore::open_read_only(file);   // never creates, changes or migrates it
  if (!s) throw CliExit(kExitStorage, fmt::format("{}: {}", what, s.error().message));
  return std::move(s.value());
}

// The runs to read without the daemon: the central database (--db, --central) or a run store
// file (--store); null when neither was given (the daemon answers).
std::unique_ptr<store::RunReader> offline_source(const Args& args, const std::string& what) {
  if (auto settings = central_settings_from_args(args, what)) return open_central(*settings, what);
  if (auto file = args.get("--store")) return open_store(*file, what);
  return nullptr;
}

// The recipe at hand for runs whose recipe text is not stored: --recipe FILE (a bad file is an
// error), else the station config's recipe when this computer has a station config that reads.
std::optional<store::LocalRecipe> local_recipe(const Args& args) {
  std::filesystem::path file;
  if (auto given = args.get("--recipe")) {
    file = *given;
  } else {
    try {
      auto config = find_station_config(args, false);
      if (!config) return std::nullopt;
      file = config->recipe;
      std::error_code ec;
      if (!std::filesystem::exists(file, ec)) return std::nullopt;
      const core::Recipe r = core::load_recipe(file);
      return store::LocalRecipe{r.name, r.version, r.content_hash, "the station config's recipe file " + file.string(),
                                r.limits};
    } catch (const std::exception&) {
      return std::nullopt;   // only a stand-in: the report says when no recipe of the runs is known
    }
  }
  const core::Recipe r = core::load_recipe(file);
  return store::LocalRecipe{r.name, r.version, r.content_hash, "the recipe file " + file.string(), r.limits};
}

void print_yield(const std::string& lot, const json& runs, std::ostream& os = std::cout) {
  const LotYield y = lot_yield(runs);
  os << fmt::format("lot {}: {} units, {} judged, {} passed, yield {:.1f} %\n", lot, y.units, y.judged, y.passed,
                           100 * y.yield);
}

// Runs of a serial or a lot as API run objects, from the daemon or a store.
json fetch_runs(const Args& args, const std::string& what, bool by_serial, const std::string& key) {
  if (auto settings = central_settings_from_args(args, what)) {
    auto reader = open_central(*settings, what);
    auto runs = by_serial ? reader->history(key, false) : reader->lot_runs(key, false);
    if (!runs) throw CliExit(kExitStorage, fmt::format("{}: {}", what, runs.error().message));
    json list = json::array();
    for (const auto& r : *runs) list.push_back(store::run_to_json(r, false));
    mark_retests_on_other_benches(list);
    return list;
  }
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
  values.insert(kCentralValueOptions.begin(), kCentralValueOptions.end());
  Args args(argv, "runs", values, {"--help", "--json", "--central"}, 0);
  if (args.flag("--help")) {
    std::cout << kRunsHelp << kCentralOptionHelp << kConnectionHelp;
    return kExitOk;
  }
  const auto serial = args.get("--serial");
  const auto lot = args.get("--lot");
  if (!serial == !lot) args.usage_error("give exactly one of --serial SERIAL or --lot LOT");
  // A serial no station accepts cannot have runs: say so rather than "no runs stored".
  if (serial) {
    if (Status s = store::validate_serial(*serial, ".*"); !s) args.usage_error("--serial: " + s.error().message);
  }
  const json runs = fetch_runs(args, "runs", serial.has_value(), serial ? *serial : *lot);
  if (args.flag("--json")) {
    json out = {{serial ? "serial" : "lot", serial ? *serial : *lot}, {"runs", runs}};
    if (lot) {
      const LotYield y = lot_yield(runs);
      out["yield"] = {{"units", y.units}, {"judged", y.judged}, {"passed", y.passed}, {"yield", y.yield}};
    }
    std::cout << out.dump(2) << "\n";
    return runs.empty() ? kExitNegative : kExitOk;
  }
  if (runs.empty()) {
    std::cout << "no runs stored for " << (serial ? "serial " + *serial : "lot " + *lot) << "\n";
    return kExitNegative;
  }
  std::cout << run_table(runs, lot.has_value());
  if (lot) print_yield(*lot, runs);
  return kExitOk;
}

int cmd_report(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--lot", "--out", "--store", "--recipe"});
  values.insert(kCentralValueOptions.begin(), kCentralValueOptions.end());
  Args args(argv, "report", values, {"--help", "--central"}, 0);
  if (args.flag("--help")) {
    std::cout << kReportHelp << kCentralOptionHelp << kConnectionHelp;
    return kExitOk;
  }
  const auto lot = args.get("--lot");
  const auto out = args.get("--out");
  if (!lot || !out || out->empty()) args.usage_error("--lot LOT and --out FILE.html (or - for standard output) are required");
  check_output_path(*out, "report");
  std::ostream& info = *out == "-" ? std::cerr : std::cout;
  std::unique_ptr<store::RunReader> source = offline_source(args, "report");
  if (source) {
    auto* st = source.get();
    auto doc = store::lot_report_document(*st, *lot, local_recipe(args), "");
    if (!doc) throw CliExit(kExitStorage, "report: " + doc.error().message);
    if (doc->runs == 0) throw CliExit(kExitNegative, fmt::format("report: no runs stored for lot \"{}\"", *lot));
    const std::string where = write_output(*out, doc->content, "report");
    auto runs = st->lot_runs(*lot, false);
    if (!runs) throw CliExit(kExitStorage, "report: " + runs.error().message);
    json list = json::array();
    for (const auto& r : *runs) list.push_back(store::run_to_json(r, false));
    print_yield(*lot, list, info);
    info << "report: " << where << "\n";
    return kExitOk;
  }
  auto api = connect_daemon(args, "engineer", "echoline report");
  api->set_max_reply_bytes(kMaxDocumentReplyBytes);
  ApiReply reply = require_link(api->call("report.lot", {{"lot", *lot}}, Millis{120000}), "report");
  require_ok(reply, "report");
  const std::string where = write_output(*out, reply.result.value("content", ""), "report");
  ApiReply runs = require_link(api->call("runs.lot", {{"lot", *lot}}), "report");
  require_ok(runs, "report");
  print_yield(*lot, runs.result.value("runs", json::array()), info);
  info << "report: " << where << "\n";
  return kExitOk;
}

int cmd_export(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert({"--scope", "--key", "--run", "--format", "--out", "--store"});
  values.insert(kCentralValueOptions.begin(), kCentralValueOptions.end());
  Args args(argv, "export", values, {"--help", "--central"}, 0);
  if (args.flag("--help")) {
    std::cout << kExportHelp << kCentralOptionHelp << kConnectionHelp;
    return kExitOk;
  }
  std::string scope = args.get_or("--scope", "");
  std::string key = args.get_or("--key", "");
  if (auto run = args.get("--run")) {
    if (!scope.empty() || !key.empty()) args.usage_error("give --run RUN_ID or --scope and --key, not both");
    scope = "run";
    key = *run;
  }
  const std::string format = args.get_or("--format", "");
  const std::string out = args.get_or("--out", "");
  if (scope != "run" && scope != "serial" && scope != "lot") args.usage_error("--scope must be run, serial or lot");
  if (format != "csv" && format != "runs-csv" && format != "json" && format != "s1p") {
    args.usage_error(fmt::format("--format must be {}", store::export_formats_text()));
  }
  if (format == "s1p" && scope != "run") args.usage_error("--format s1p holds one run: give --run RUN_ID");
  if (key.empty() || out.empty()) args.usage_error("--key KEY (or --run RUN_ID) and --out FILE (or - for standard output) are required");
  check_output_path(out, "export");
  std::ostream& info = out == "-" ? std::cerr : std::cout;
  store::Document doc;
  std::unique_ptr<store::RunReader> source = offline_source(args, "export");
  if (source) {
    auto* st = source.get();
    auto made = store::export_document(*st, scope, key, format);
    if (!made) throw CliExit(made.error().kind == ErrorKind::invalid_argument ? kExitUsage : kExitStorage,
                             made.error().message);
    doc = std::move(made.value());
    if (doc.runs == 0) throw CliExit(kExitNegative, fmt::format("export: no runs stored for {} \"{}\"", scope, key));
  } else {
    auto api = connect_daemon(args, "engineer", "echoline export");
    api->set_max_reply_bytes(kMaxDocumentReplyBytes);
    ApiReply reply = require_link(
        api->call("export", {{"scope", scope}, {"key", key}, {"format", format}}, Millis{120000}), "export");
    require_ok(reply, "export");
    doc.content = reply.result.value("content", "");
    doc.runs = reply.result.value("runs", 0u);
  }
  const std::string where = write_output(out, doc.content, "export");
  info << fmt::format("exported {} run{} to {}\n", doc.runs, doc.runs == 1 ? "" : "s", where);
  return kExitOk;
}

}  // namespace echoline::client
