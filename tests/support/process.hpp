// Test support: start a real child process (simulator, daemon, client), read its stdout lines
// with deadlines, write to its stdin, stop it with SIGTERM or SIGKILL; and temporary folders.
// Not thread-safe: one test thread drives one ChildProcess.
#pragma once

#include <chrono>
#include <filesystem>
#include <map>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace echoline::testing {

using namespace std::chrono_literals;

class ChildProcess {
 public:
  struct Options {
    std::map<std::string, std::string> env;  // added to (or replacing in) the parent's environment
    bool pipe_stdin = false;                 // write_stdin() available when true
    bool merge_stderr = false;               // stderr into the stdout pipe (default: inherited)
    std::filesystem::path cwd;               // empty: the parent's
  };

  // Starts argv[0] (a path) with argv. Throws std::runtime_error if it cannot start.
  static ChildProcess start(std::vector<std::string> argv, Options options);
  static ChildProcess start(std::vector<std::string> argv) { return start(std::move(argv), Options{}); }

  ChildProcess(ChildProcess&& other) noexcept;
  ChildProcess& operator=(ChildProcess&& other) noexcept;
  ChildProcess(const ChildProcess&) = delete;
  ChildProcess& operator=(const ChildProcess&) = delete;
  ~ChildProcess();  // SIGKILL and reap if still running

  // Next line of stdout (without the newline), or nullopt at EOF or when the timeout passes.
  std::optional<std::string> read_line(std::chrono::milliseconds timeout = 10s);
  // Reads lines until one contains `needle`; returns it, or nullopt (EOF or timeout).
  // Every line read on the way is appended to output_lines().
  std::optional<std::string> wait_for_line(std::string_view needle, std::chrono::milliseconds timeout = 10s);
  // Everything read from stdout so far, line by line.
  const std::vector<std::string>& output_lines() const { return output_lines_; }

  // Writes to the child's stdin (Options::pipe_stdin). Returns false on error.
  bool write_stdin(std::string_view text);
  void close_stdin();

  // SIGTERM, wait up to `grace`, then SIGKILL. Returns the exit code (>= 0), or -signal.
  int terminate(std::chrono::milliseconds grace = 5s);
  // SIGKILL now and reap. Returns -9 normally.
  int kill_now();
  // Waits for exit up to `timeout`; exit code, -signal, or nullopt if still running.
  std::optional<int> wait(std::chrono::milliseconds timeout);
  bool running();
  int pid() const { return pid_; }

 private:
  ChildProcess() = default;
  void reset() noexcept;
  int pid_ = -1;
  int out_fd_ = -1;
  int in_fd_ = -1;
  std::string buffer_;
  std::vector<std::string> output_lines_;
  std::optional<int> status_;
};

// A program run to its end: its exit code (-999 when it did not end in time) and what it wrote
// to stdout and stderr, together.
struct Outcome {
  int code = -1000;
  std::string output;
};
Outcome run_to_end(std::vector<std::string> argv, std::map<std::string, std::string> env = {},
                   std::chrono::milliseconds timeout = std::chrono::seconds(20));

// Parses "key=value" fields of a line such as "endpoint role=source transport=tcp address=tcp://..".
std::map<std::string, std::string> parse_fields(std::string_view line);

// A fresh folder under /tmp (or $TMPDIR) that is removed with its contents on destruction.
class TempDir {
 public:
  explicit TempDir(std::string_view prefix = "echoline-test");
  ~TempDir();
  TempDir(const TempDir&) = delete;
  TempDir& operator=(const TempDir&) = delete;
  const std::filesystem::path& path() const { return path_; }
  std::filesystem::path operator/(std::string_view name) const { return path_ / std::string(name); }

 private:
  std::filesystem::path path_;
};

// Paths of the project's binaries and sources (compile definitions set in tests/CMakeLists.txt).
std::filesystem::path source_dir();
std::filesystem::path sim_binary();
std::filesystem::path daemon_binary();
std::filesystem::path client_binary();

}  // namespace echoline::testing
