// The one logging set-up of every Echoline program (echolined, echoline, echoline-sim): an
// stderr sink and an optional rotating file sink. Under systemd, when stderr is the journal
// (JOURNAL_STREAM, systemd.exec(5)), stderr lines carry sd-daemon priority prefixes ("<3>" error,
// "<4>" warning, "<6>" info, "<7>" debug; sd-daemon(3)) and no timestamp of their own; the file
// keeps its timestamps. Call setup_logging() once at start-up (before threads start) and
// shutdown_logging() at exit; spdlog's loggers are thread-safe in between.
#pragma once

#include <cstddef>
#include <filesystem>
#include <string>
#include <string_view>

namespace echoline {

struct LogOptions {
  std::string program;              // logger name, shown in every line
  std::filesystem::path file;       // rotating log file; empty = no file
  std::size_t file_max_bytes = 5u * 1024 * 1024;   // rotated at this size ...
  std::size_t file_count = 3;                      // ... keeping this many files
  std::string level = "info";       // trace|debug|info|warn|error|critical|off
  bool console = true;              // also log to stderr
  // Drop stderr lines (counted, then reported) rather than wait for a reader that stalls: for
  // the daemon, whose sweep thread must never block on a log line with RF on.
  bool console_never_blocks = false;
  std::string flush_level = "info";   // lines at this level and above are flushed at once
};

// True when stderr is systemd's journal: JOURNAL_STREAM holds "<device>:<inode>" of stderr
// (systemd.exec(5)). `journal_stream`: the variable's value (nullptr = not set).
bool stderr_is_journal(const char* journal_stream);

// sd-daemon(3) priority prefix for an spdlog level name: "<2>" critical, "<3>" error,
// "<4>" warning, "<6>" info, "<7>" debug and trace; "" for anything else.
std::string_view journal_prefix(std::string_view level);

// Installs the default logger. Throws std::invalid_argument naming the level when it is
// unknown, and std::runtime_error naming the file when the log file cannot be opened: an edge,
// at start-up.
void setup_logging(const LogOptions& options);

// Flushes and drops all loggers.
void shutdown_logging();

}  // namespace echoline
