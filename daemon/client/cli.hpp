// Shared edge code of the `echoline` subcommands: a small option parser, the one exception type
// that carries an exit code to main(), finding the station config, and connecting to the daemon
// (Unix socket or TCP, hello with role and token). Exceptions are used here only (edge code).
// One thread.
#pragma once

#include <chrono>
#include <ostream>

#include <filesystem>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <stdexcept>
#include <string>
#include <vector>

#include "daemon/client/api_client.hpp"
#include "drivers/station_config.hpp"

namespace echoline::client {

// Ends a subcommand with an exit code and a message for stderr ("" = nothing to print).
struct CliExit : std::runtime_error {
  CliExit(int code_, const std::string& message) : std::runtime_error(message), code(code_) {}
  int code;
};

// Options of one subcommand. Unknown options, missing values and stray arguments throw
// CliExit(kExitUsage) naming them.
class Args {
 public:
  // `values`: options that take a value ("--lot"); `flags`: options without one ("--help").
  // `max_positional`: how many plain arguments are allowed.
  Args(const std::vector<std::string>& argv, const std::string& command, std::set<std::string> values,
       std::set<std::string> flags, std::size_t max_positional);
  std::optional<std::string> get(const std::string& name) const;
  std::string get_or(const std::string& name, const std::string& fallback) const;
  bool flag(const std::string& name) const { return flags_set_.count(name) != 0; }
  // True when this command takes the value option `name` (whether given or not).
  bool accepts(const std::string& name) const { return accepted_values_.count(name) != 0; }
  const std::vector<std::string>& positional() const { return positional_; }
  [[noreturn]] void usage_error(const std::string& message) const;

 private:
  std::string command_;
  std::set<std::string> accepted_values_;
  std::map<std::string, std::string> values_;
  std::set<std::string> flags_set_;
  std::vector<std::string> positional_;
};

// The options every daemon-talking subcommand accepts.
inline const std::set<std::string> kConnectionOptions = {"--config", "--socket", "--tcp", "--token-file"};
extern const char* const kConnectionHelp;

// The station config: --config, else $ECHOLINE_CONFIG, else config/station.jsonc when present.
// `required`: throw when none can be found (a usage error naming the option the command documents,
// --station for recipe check and dry-run, and the paths tried). A config named explicitly that does not load throws
// its ConfigError; the implicit default is skipped quietly when it does not load.
std::optional<drivers::StationConfig> find_station_config(const Args& args, bool required);

// The run store file of a station: <data_dir>/<station>.sqlite.
std::filesystem::path store_file(const drivers::StationConfig& config);

// Connects to the daemon and says hello. Address: --socket, else --tcp host:port, else
// $ECHOLINE_SOCKET, else the station config's api.unix_socket. Token: --token-file, else the
// config's api.token_file when readable. Throws CliExit: kExitUnreachable when the daemon
// cannot be reached, kExitUsage when no address is known or the token is refused.
// After hello it waits (a line on stderr) while the daemon is still connecting its instruments
// at start-up or probing them, so every command sees the station as it will be once ready.
std::unique_ptr<ApiClient> connect_daemon(const Args& args, const std::string& role, const std::string& client_name);

// Every instrument in a status reply is healthy.
bool all_healthy(const nlohmann::json& st);
// An instrument reported NOT READY may have come back since its last bring-up: while the station
// is idle, asks the daemon to try once more (instruments.probe). True when it tried (ask for
// status again); false when all were healthy, the station was busy, or the daemon refused.
bool probe_when_idle(ApiClient& api, const nlohmann::json& st);

// True for the daemon's busy kinds that only bring instruments up: "instrument connect" (its
// start-up) and "probe" (another client's instruments.probe). Both end within the instruments'
// timeouts, so a client waits for them instead of reporting the station busy.
bool instruments_busy_kind(const std::string& kind);
// Polls status while the daemon is busy with one of those, saying once on `note` that it waits.
// False when `limit` passed first; true otherwise (also when status fails: the caller's next
// request reports that).
bool wait_while_instruments_busy(ApiClient& api, std::ostream& note, std::chrono::seconds limit = std::chrono::seconds(120));

// Throws CliExit for a refused reply: the exit code from the API error code, the message
// prefixed with `what`.
void require_ok(const ApiReply& reply, const std::string& what);
// Unwraps a transport result or throws CliExit(kExitUnreachable).
ApiReply require_link(Result<ApiReply> reply, const std::string& what);

}  // namespace echoline::client
