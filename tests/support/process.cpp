// Child processes and temp folders for integration tests (process.hpp).
#include "tests/support/process.hpp"

#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include <cerrno>
#include <cstdlib>
#include <cstring>
#include <stdexcept>
#include <thread>
#include <utility>

extern char** environ;

namespace echoline::testing {

namespace {

std::optional<int> decode_status(int status) {
  if (WIFEXITED(status)) return WEXITSTATUS(status);
  if (WIFSIGNALED(status)) return -WTERMSIG(status);
  return std::nullopt;
}

}  // namespace

ChildProcess ChildProcess::start(std::vector<std::string> argv, Options options) {
  if (argv.empty()) throw std::runtime_error("ChildProcess::start: empty argv");
  int out_pipe[2];
  int in_pipe[2] = {-1, -1};
  if (pipe2(out_pipe, O_CLOEXEC) != 0) throw std::runtime_error("pipe: " + std::string(strerror(errno)));
  if (options.pipe_stdin && pipe2(in_pipe, O_CLOEXEC) != 0) {
    throw std::runtime_error("pipe: " + std::string(strerror(errno)));
  }
  // Build argv/envp before fork (no allocation in the child).
  std::vector<char*> args;
  for (auto& a : argv) args.push_back(a.data());
  args.push_back(nullptr);
  std::map<std::string, std::string> env_map;
  for (char** e = environ; *e; ++e) {
    std::string kv(*e);
    auto eq = kv.find('=');
    if (eq != std::string::npos) env_map[kv.substr(0, eq)] = kv.substr(eq + 1);
  }
  for (auto& [k, v] : options.env) env_map[k] = v;
  std::vector<std::string> env_strings;
  for (auto& [k, v] : env_map) env_strings.push_back(k + "=" + v);
  std::vector<char*> envp;
  for (auto& s : env_strings) envp.push_back(s.data());
  envp.push_back(nullptr);
  std::string cwd = options.cwd.string();

  pid_t pid = fork();
  if (pid < 0) throw std::runtime_error("fork: " + std::string(strerror(errno)));
  if (pid == 0) {
    dup2(out_pipe[1], STDOUT_FILENO);
    if (options.merge_stderr) dup2(out_pipe[1], STDERR_FILENO);
    if (options.pipe_stdin) {
      dup2(in_pipe[0], STDIN_FILENO);
    } else {
      int devnull = open("/dev/null", O_RDONLY);
      if (devnull >= 0) dup2(devnull, STDIN_FILENO);
    }
    if (!cwd.empty() && chdir(cwd.c_str()) != 0) _exit(126);
    setpgid(0, 0);  // own process group: a kill reaches its children too
    execve(args[0], args.data(), envp.data());
    _exit(127);
  }
  close(out_pipe[1]);
  if (options.pipe_stdin) close(in_pipe[0]);
  ChildProcess p;
  p.pid_ = pid;
  p.out_fd_ = out_pipe[0];
  p.in_fd_ = options.pipe_stdin ? in_pipe[1] : -1;
  return p;
}

ChildProcess::ChildProcess(ChildProcess&& other) noexcept { *this = std::move(other); }

ChildProcess& ChildProcess::operator=(ChildProcess&& other) noexcept {
  if (this != &other) {
    reset();
    pid_ = std::exchange(other.pid_, -1);
    out_fd_ = std::exchange(other.out_fd_, -1);
    in_fd_ = std::exchange(other.in_fd_, -1);
    buffer_ = std::move(other.buffer_);
    output_lines_ = std::move(other.output_lines_);
    status_ = std::exchange(other.status_, std::nullopt);
  }
  return *this;
}

ChildProcess::~ChildProcess() { reset(); }

void ChildProcess::reset() noexcept {
  if (pid_ > 0 && !status_) {
    ::kill(-pid_, SIGKILL);
    ::kill(pid_, SIGKILL);
    int st = 0;
    waitpid(pid_, &st, 0);
  }
  if (out_fd_ >= 0) close(out_fd_);
  if (in_fd_ >= 0) close(in_fd_);
  pid_ = out_fd_ = in_fd_ = -1;
  status_.reset();
}

std::optional<std::string> ChildProcess::read_line(std::chrono::milliseconds timeout) {
  auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    auto nl = buffer_.find('\n');
    if (nl != std::string::npos) {
      std::string line = buffer_.substr(0, nl);
      buffer_.erase(0, nl + 1);
      output_lines_.push_back(line);
      return line;
    }
    if (out_fd_ < 0) return std::nullopt;
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    // Poll at least once, also with no time left: a zero timeout reads what is already there
    // (a caller draining a child's output must empty the pipe, or the child blocks on write).
    if (left.count() < 0) left = std::chrono::milliseconds(0);
    pollfd pfd{out_fd_, POLLIN, 0};
    int r = poll(&pfd, 1, static_cast<int>(left.count()));
    if (r < 0 && errno == EINTR) continue;
    if (r <= 0) return std::nullopt;
    char chunk[4096];
    ssize_t n = ::read(out_fd_, chunk, sizeof chunk);
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) {
      close(out_fd_);
      out_fd_ = -1;
      if (!buffer_.empty()) {  // last line without a newline
        std::string line = std::move(buffer_);
        buffer_.clear();
        output_lines_.push_back(line);
        return line;
      }
      return std::nullopt;
    }
    buffer_.append(chunk, static_cast<std::size_t>(n));
  }
}

std::optional<std::string> ChildProcess::wait_for_line(std::string_view needle, std::chrono::milliseconds timeout) {
  auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    if (left.count() <= 0) return std::nullopt;
    auto line = read_line(left);
    if (!line) return std::nullopt;
    if (line->find(needle) != std::string::npos) return line;
  }
}

bool ChildProcess::write_stdin(std::string_view text) {
  if (in_fd_ < 0) return false;
  while (!text.empty()) {
    ssize_t n = ::write(in_fd_, text.data(), text.size());
    if (n < 0 && errno == EINTR) continue;
    if (n <= 0) return false;
    text.remove_prefix(static_cast<std::size_t>(n));
  }
  return true;
}

void ChildProcess::close_stdin() {
  if (in_fd_ >= 0) close(in_fd_);
  in_fd_ = -1;
}

std::optional<int> ChildProcess::wait(std::chrono::milliseconds timeout) {
  if (status_) return status_;
  if (pid_ <= 0) return std::nullopt;
  auto deadline = std::chrono::steady_clock::now() + timeout;
  for (;;) {
    int st = 0;
    pid_t r = waitpid(pid_, &st, WNOHANG);
    if (r == pid_) {
      status_ = decode_status(st);
      return status_;
    }
    if (r < 0) return std::nullopt;
    if (std::chrono::steady_clock::now() >= deadline) return std::nullopt;
    std::this_thread::sleep_for(5ms);
  }
}

bool ChildProcess::running() { return pid_ > 0 && !wait(0ms).has_value(); }

int ChildProcess::terminate(std::chrono::milliseconds grace) {
  if (status_) return *status_;
  if (pid_ <= 0) return -1;
  ::kill(pid_, SIGTERM);
  if (auto s = wait(grace)) return *s;
  return kill_now();
}

int ChildProcess::kill_now() {
  if (status_) return *status_;
  if (pid_ <= 0) return -1;
  ::kill(-pid_, SIGKILL);
  ::kill(pid_, SIGKILL);
  int st = 0;
  waitpid(pid_, &st, 0);
  status_ = decode_status(st);
  return status_.value_or(-9);
}

std::map<std::string, std::string> parse_fields(std::string_view line) {
  std::map<std::string, std::string> out;
  std::size_t i = 0;
  while (i < line.size()) {
    while (i < line.size() && line[i] == ' ') ++i;
    std::size_t j = line.find(' ', i);
    if (j == std::string_view::npos) j = line.size();
    std::string_view field = line.substr(i, j - i);
    auto eq = field.find('=');
    if (eq != std::string_view::npos) out[std::string(field.substr(0, eq))] = std::string(field.substr(eq + 1));
    i = j;
  }
  return out;
}

TempDir::TempDir(std::string_view prefix) {
  const char* base = std::getenv("TMPDIR");
  std::string templ = std::string(base && *base ? base : "/tmp") + "/" + std::string(prefix) + "-XXXXXX";
  if (!mkdtemp(templ.data())) throw std::runtime_error("mkdtemp: " + std::string(strerror(errno)));
  path_ = templ;
}

TempDir::~TempDir() {
  std::error_code ec;
  std::filesystem::remove_all(path_, ec);
}

std::filesystem::path source_dir() { return ECHOLINE_SOURCE_DIR; }
std::filesystem::path sim_binary() { return ECHOLINE_SIM_BIN; }
std::filesystem::path daemon_binary() { return ECHOLINE_DAEMON_BIN; }
std::filesystem::path client_binary() { return ECHOLINE_CLIENT_BIN; }

Outcome run_to_end(std::vector<std::string> argv, std::map<std::string, std::string> env,
                   std::chrono::milliseconds timeout) {
  ChildProcess::Options o;
  o.merge_stderr = true;
  o.env = std::move(env);
  auto p = ChildProcess::start(std::move(argv), o);
  Outcome out;
  while (auto line = p.read_line(timeout)) out.output += *line + "\n";
  out.code = p.wait(timeout).value_or(-999);
  return out;
}

}  // namespace echoline::testing
