// Logging set-up for every Echoline program: spdlog console sink (stderr) and a rotating file
// sink (5 MB x 3). Call setup_logging() once at start-up (before threads start) and
// shutdown_logging() at exit; spdlog's loggers are thread-safe in between.
#pragma once

#include <filesystem>
#include <string>

namespace echoline {

struct LogOptions {
  std::string program;              // logger name, shown in every line
  std::filesystem::path file;       // rotating log file; empty = no file
  std::string level = "info";       // trace|debug|info|warn|error|critical|off
  bool console = true;              // also log to stderr
};

// Installs the default logger. Throws std::invalid_argument for an unknown level and
// std::runtime_error (naming the file) when the log file cannot be opened: an edge, at start-up.
void setup_logging(const LogOptions& options);

// Flushes and drops all loggers.
void shutdown_logging();

}  // namespace echoline
