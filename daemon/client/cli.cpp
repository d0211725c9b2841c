#include "daemon/client/cli.hpp"

#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <sstream>
#include <thread>

#include <fmt/format.h>

#include "daemon/client/exit_codes.hpp"
#include "drivers/config_error.hpp"

namespace echoline::client {

const char* const kConnectionHelp =
    "connection (how to reach echolined):\n"
    "  --socket PATH        the daemon's Unix socket\n"
    "  --tcp HOST:PORT      the daemon's TCP listener instead (with --token-file off loopback)\n"
    "  --token-file FILE    API token for the engineer role and for non-loopback TCP\n"
    "  --config FILE        station config whose api.unix_socket (and api.token_file) to use;\n"
    "                       default $ECHOLINE_CONFIG, else config/station.jsonc when present,\n"
    "                       else " ECHOLINE_INSTALLED_STATION_CONFIG " (an installed station)\n"
    "  ($ECHOLINE_SOCKET is used when neither --socket nor --tcp is given)\n";

Args::Args(const std::vector<std::string>& argv, const std::string& command, std::set<std::string> values,
           std::set<std::string> flags, std::size_t max_positional)
    : command_(command), accepted_values_(values) {
  for (std::size_t i = 0; i < argv.size(); ++i) {
    std::string a = argv[i];
    if (a.size() > 2 && a.rfind("--", 0) == 0) {
      std::string value;
      bool inline_value = false;
      if (auto eq = a.find('='); eq != std::string::npos) {
        value = a.substr(eq + 1);
        a = a.substr(0, eq);
        inline_value = true;
      }
      if (values.count(a)) {
        if (!inline_value) {
          if (i + 1 >= argv.size()) usage_error(fmt::format("{} needs a value", a));
          value = argv[++i];
        }
        values_[a] = value;
      } else if (flags.count(a) && !inline_value) {
        flags_set_.insert(a);
      } else {
        usage_error(fmt::format("unknown option {}", argv[i]));
      }
    } else if (a == "-h") {
      flags_set_.insert("--help");
    } else {
      positional_.push_back(a);
    }
  }
  if (positional_.size() > max_positional && !flag("--help")) {
    usage_error(fmt::format("unexpected argument \"{}\"", positional_[max_positional]));
  }
}

std::optional<std::string> Args::get(const std::string& name) const {
  auto it = values_.find(name);
  if (it == values_.end()) return std::nullopt;
  return it->second;
}

std::string Args::get_or(const std::string& name, const std::string& fallback) const {
  auto v = get(name);
  return v ? *v : fallback;
}

void Args::usage_error(const std::string& message) const {
  throw CliExit(kExitUsage, fmt::format("{}: {}\n(see echoline {} --help)", command_, message, command_));
}

std::optional<drivers::StationConfig> find_station_config(const Args& args, bool required) {
  std::optional<std::string> explicit_file = args.get("--config");
  if (!explicit_file) explicit_file = args.get("--station");
  if (!explicit_file) {
    if (const char* env = std::getenv("ECHOLINE_CONFIG"); env != nullptr && *env) explicit_file = env;
  }
  if (explicit_file) return drivers::load_station_config(*explicit_file);   // throws ConfigError
  // The checkout's demo station first, then the installed station's (config/packaging/).
  std::string tried;
  for (const std::filesystem::path fallback : {"config/station.jsonc", ECHOLINE_INSTALLED_STATION_CONFIG}) {
    std::error_code ec;
    tried += fmt::format("{}{}", tried.empty() ? "" : ", ", std::filesystem::absolute(fallback, ec).string());
    if (!std::filesystem::exists(fallback, ec)) continue;
    try {
      return drivers::load_station_config(fallback);
    } catch (const drivers::ConfigError& e) {
      if (required) throw;
    }
  }
  if (required) {
    // Name the option this command documents (recipe check and dry-run say --station).
    const std::string option = args.accepts("--station") ? "--station CONFIG" : "--config FILE";
    throw CliExit(kExitUsage, fmt::format("no station config: give {} (or set ECHOLINE_CONFIG); none found at {}",
                                          option, tried));
  }
  return std::nullopt;
}

std::filesystem::path store_file(const drivers::StationConfig& config) {
  return config.data_dir / (config.station + ".sqlite");
}

namespace {

std::string read_token(const std::filesystem::path& file, bool must) {
  std::ifstream in(file);
  if (!in) {
    if (must) throw CliExit(kExitUsage, fmt::format("--token-file {}: cannot read", file.string()));
    return "";
  }
  std::stringstream ss;
  ss << in.rdbuf();
  std::string t = ss.str();
  while (!t.empty() && (t.back() == '\n' || t.back() == '\r' || t.back() == ' ' || t.back() == '\t')) t.pop_back();
  return t;
}

}  // namespace

std::unique_ptr<ApiClient> connect_daemon(const Args& args, const std::string& role, const std::string& client_name) {
  std::string address;
  std::string token;
  std::optional<drivers::StationConfig> config;
  if (auto s = args.get("--socket")) {
    address = "unix:" + *s;
  } else if (auto t = args.get("--tcp")) {
    std::string host;
    int port = 0;
    if (!split_host_port(*t, host, port)) {
      args.usage_error(fmt::format("--tcp {}: expected HOST:PORT with a port from 1 to 65535", *t));
    }
    address = fmt::format("tcp://{}:{}", host, port);
  } else if (const char* env = std::getenv("ECHOLINE_SOCKET"); env != nullptr && *env) {
    address = std::string("unix:") + env;
  } else {
    config = find_station_config(args, false);
    if (!config) {
      throw CliExit(kExitUsage, "no daemon address: give --socket PATH, --tcp HOST:PORT or --config FILE "
                                "(or set ECHOLINE_SOCKET)");
    }
    address = "unix:" + config->api.unix_socket.string();
  }
  if (auto tf = args.get("--token-file")) {
    token = read_token(*tf, true);
  } else {
    if (!config && (args.get("--config") || std::getenv("ECHOLINE_CONFIG"))) config = find_station_config(args, false);
    if (config && !config->api.token_file.empty()) token = read_token(config->api.token_file, false);
  }
  auto link = LineConnection::connect_address(address, Millis{5000});
  if (!link) {
    // A socket (or its folder) this login may not use: the login lacks the daemon's group.
    const std::string path = address.rfind("unix:", 0) == 0 ? address.substr(5) : std::string();
    const bool refused = !path.empty() && ::access(path.c_str(), R_OK | W_OK) != 0 && errno == EACCES;
    const std::string hint =
        refused ? fmt::format("Your login may not use {}: ask for the group that owns it (on an installed station: "
                              "sudo usermod -aG echoline <login>, then log in again)", path)
                : std::string("Is echolined running? Start it with: echolined --config <station.jsonc>");
    throw CliExit(kExitUnreachable, fmt::format("cannot reach the daemon: {}\n{}", link.error().message, hint));
  }
  auto api = std::make_unique<ApiClient>(std::move(link.value()));
  auto hello = api->hello(role, token, client_name);
  if (!hello) {
    throw CliExit(kExitUnreachable, fmt::format("cannot reach the daemon: {}", hello.error().message));
  }
  if (!hello->ok) {
    throw CliExit(exit_code_for_api_error(hello->code),
                  fmt::format("the daemon refused the {} role ({}): {}", role, hello->code, hello->message));
  }
  wait_while_instruments_busy(*api, std::cerr);
  return api;
}

bool all_healthy(const nlohmann::json& st) {
  bool healthy = true;
  if (st.contains("instruments")) {
    for (const auto& i : st["instruments"]) healthy = healthy && i.value("healthy", false);
  }
  return healthy;
}

// An instrument reported NOT READY may have come back since its last bring-up (a cable
// plugged in, a generator switched on): while the station is idle, ask the daemon to try once
// more before showing it. Returns whether it tried (the caller then asks for status again).
bool probe_when_idle(ApiClient& api, const nlohmann::json& st) {
  if (all_healthy(st) || (st.contains("busy") && !st["busy"].is_null())) return false;
  auto r = api.call("instruments.probe", nlohmann::json::object());
  if (!r || !r->ok) return false;   // busy meanwhile, or an older daemon: show what it has
  const long id = api.last_id();
  for (;;) {
    auto m = api.next_message(std::chrono::seconds(120));
    if (!m) return false;
    if (m->value("id", -1L) == id && m->contains("event")) return true;
  }
}

bool instruments_busy_kind(const std::string& kind) { return kind == "instrument connect" || kind == "probe"; }

bool wait_while_instruments_busy(ApiClient& api, std::ostream& note, std::chrono::seconds limit) {
  const auto deadline = std::chrono::steady_clock::now() + limit;
  bool said = false;
  for (;;) {
    auto st = api.call("status", nlohmann::json::object());
    if (!st || !st->ok) return true;   // the caller's own request reports what is wrong
    const nlohmann::json& busy = st->result.contains("busy") ? st->result["busy"] : nlohmann::json();
    const std::string kind = busy.is_object() ? busy.value("kind", std::string()) : std::string();
    if (!instruments_busy_kind(kind)) {
      if (said) note << "The instruments are connected.\n" << std::flush;
      return true;
    }
    if (std::chrono::steady_clock::now() >= deadline) return false;
    if (!said) {
      note << (kind == "probe" ? "echolined is trying the instruments again (an instrument that does not answer holds "
                                 "it for its timeouts). Waiting...\n"
                               : "echolined is starting: it is connecting the instruments. Waiting...\n")
           << std::flush;
      said = true;
    }
    std::this_thread::sleep_for(std::chrono::milliseconds(250));
  }
}

void require_ok(const ApiReply& reply, const std::string& what) {
  if (reply.ok) return;
  // The daemon's messages often name the call already ("export: no runs stored ..."): once is enough.
  const bool named = reply.message.rfind(what + ":", 0) == 0;
  throw CliExit(exit_code_for_api_error(reply.code),
                named ? fmt::format("{} ({})", reply.message, reply.code)
                      : fmt::format("{}: {} ({})", what, reply.message, reply.code));
}

ApiReply require_link(Result<ApiReply> reply, const std::string& what) {
  if (!reply) throw CliExit(kExitUnreachable, fmt::format("{}: lost the daemon: {}", what, reply.error().message));
  return std::move(reply.value());
}

}  // namespace echoline::client
