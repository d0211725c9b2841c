// The client's way to the central database: which one (--db CONNINFO|SETTINGS-FILE, or --central
// for the station config's settings file) and a reader on it. Edge code: throws CliExit.
#pragma once

#include <memory>
#include <optional>
#include <string>

#include "daemon/central/reader.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/client/cli.hpp"

namespace echoline::client {

// Options runs, report and export take for it, and their help text.
inline const std::set<std::string> kCentralValueOptions = {"--db"};
inline const std::set<std::string> kCentralFlagOptions = {"--central"};
extern const char* const kCentralOptionHelp;

// nullopt when neither --db nor --central was given. Throws CliExit(kExitUsage) for a settings
// file that is refused (permissions, keys) or a connection string libpq cannot parse.
std::optional<central::CentralSettings> central_settings_from_args(const Args& args, const std::string& what);
// Throws CliExit(kExitStorage) when it cannot connect (message without the password).
std::unique_ptr<central::CentralReader> open_central(const central::CentralSettings& settings, const std::string& what);

}  // namespace echoline::client
