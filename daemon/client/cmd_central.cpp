// `echoline central migrate`: creates or upgrades the central database's schema and roles (an
// administrator's job), and the client's way to the central database for runs, report and
// export (--db CONNINFO|SETTINGS-FILE, --central: the station config's settings file).
#include <iostream>
#include <set>

#include <fmt/format.h>
#include <pqxx/pqxx>

#include "daemon/central/schema.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/client/central_access.hpp"
#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"

namespace echoline::client {

namespace {
constexpr const char* kCentralHelp =
    "usage: echoline central migrate --db CONNINFO|SETTINGS-FILE | --central [--config FILE]\n\n"
    "Creates the central database's schema \"echoline\" and the group roles echoline_station\n"
    "(insert only) and echoline_reader (read only), or brings an older schema up to date. Run it\n"
    "as an administrator of the database (the owner, with CREATEROLE). Then make one login role\n"
    "per station in echoline_station and give readers echoline_reader (README, \"Many stations,\n"
    "one record\"). CONNINFO is a libpq connection string (postgresql://... or key=value)\n"
    "without a password: one with a password is refused, since others can read a command line.\n"
    "Put the password in ~/.pgpass or the file PGPASSFILE names (mode 0600, lines\n"
    "host:port:dbname:user:password; libpq reads it), or use a settings file (mode 0600).\n\n"
    "exit: 0 up to date, 2 usage, 5 the database could not be reached or migrated\n\n";
}  // namespace

// Every user of the computer can read a command line (ps, /proc/PID/cmdline): a password never
// goes on one.
constexpr const char* kPasswordRefusal =
    "--db: the connection string holds a password, and any user of this computer can read a command "
    "line in the process list; nothing was sent. Give --db the connection string without it and put the "
    "password in libpq's password file (~/.pgpass, or the file the PGPASSFILE environment variable names; "
    "mode 0600, one line host:port:dbname:user:password), or in a central settings file (mode 0600) given "
    "as --db FILE or --central (README, \"Many stations, one record\")";

const char* const kCentralOptionHelp =
    "central database (reads runs of every station instead of this station's store):\n"
    "  --db CONNINFO|FILE  a PostgreSQL connection string (postgresql://... or key=value), or a\n"
    "                      settings file (mode 0600; README, \"Many stations, one record\")\n"
    "  --central           the settings file the station config names (\"central\")\n"
    "  A connection string with a password is refused (others can read a command line): put the\n"
    "  password in ~/.pgpass or the file PGPASSFILE names (mode 0600, one line\n"
    "  host:port:dbname:user:password, read by libpq), or in a settings file.\n\n";

std::optional<central::CentralSettings> central_settings_from_args(const Args& args, const std::string& what) {
  std::optional<Result<central::CentralSettings>> got;
  if (auto db = args.get("--db")) {
    if (central::looks_like_connection_string(*db)) {
      got = central::settings_from_connection_string(*db);
      if (*got && !(*got)->password.empty()) throw CliExit(kExitUsage, fmt::format("{}: {}", what, kPasswordRefusal));
    } else {
      got = central::load_settings(*db);
    }
  } else if (args.flag("--central")) {
    auto config = find_station_config(args, true);
    if (config->central_settings.empty()) {
      throw CliExit(kExitUsage, fmt::format("{}: the station config {} names no central database (\"central\")", what,
                                            config->file));
    }
    got = central::load_settings(config->central_settings);
  }
  if (!got) return std::nullopt;
  if (!*got) throw CliExit(kExitUsage, fmt::format("{}: {}", what, got->error().message));
  return got->value();
}

std::unique_ptr<central::CentralReader> open_central(const central::CentralSettings& settings, const std::string& what) {
  auto r = central::CentralReader::open(settings);
  if (!r) throw CliExit(kExitStorage, fmt::format("{}: {}", what, r.error().message));
  return std::move(r.value());
}

int cmd_central(const Argv& argv) {
  std::set<std::string> values = {"--db", "--config"};
  Args args(argv, "central", values, {"--help", "--central"}, 1);
  if (args.flag("--help") || args.positional().empty()) {
    std::cout << kCentralHelp;
    return args.flag("--help") ? kExitOk : kExitUsage;
  }
  if (args.positional().front() != "migrate") {
    args.usage_error(fmt::format("unknown central command \"{}\" (migrate)", args.positional().front()));
  }
  auto settings = central_settings_from_args(args, "central migrate");
  if (!settings) args.usage_error("give --db CONNINFO|SETTINGS-FILE or --central");
  try {
    pqxx::connection conn(settings->conninfo);
    const auto applied = central::migrate(conn);
    if (applied.empty()) {
      std::cout << fmt::format("central database {}: schema version {}, up to date\n", settings->description,
                               central::kCentralSchemaVersion);
    }
    for (int v : applied) {
      std::cout << fmt::format("central database {}: schema version {} applied ({})\n", settings->description, v,
                               central::central_migrations()[static_cast<std::size_t>(v - 1)].what);
    }
    return kExitOk;
  } catch (const std::exception& e) {
    throw CliExit(kExitStorage, central::scrub(fmt::format("central migrate: central database {}: {}",
                                                           settings->description, e.what()),
                                               settings->password));
  }
}

}  // namespace echoline::client
