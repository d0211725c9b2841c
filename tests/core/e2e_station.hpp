// Test harness for end-to-end station tests: a real echoline-sim, a real echolined pointed at
// its endpoints, JSON-lines clients on the daemon's Unix socket and on the sim's control port.
// Header-only (used by tests/core/e2e_*.cpp and tests/service/daemon_*_test.cpp).
// Not thread-safe: one test thread drives one harness.
#pragma once

#include <netinet/in.h>
#include <netinet/tcp.h>
#include <poll.h>
#include <sys/socket.h>
#include <sys/un.h>
#include <unistd.h>
#include <arpa/inet.h>

#include <chrono>
#include <cstring>
#include <deque>
#include <fstream>
#include <optional>
#include <stdexcept>
#include <string>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "tests/support/process.hpp"

namespace echoline::e2e {

using nlohmann::json;
using namespace std::chrono_literals;

// A blocking line socket with read deadlines (Unix or TCP). Owns its descriptor.
class LineSocket {
 public:
  static LineSocket unix_socket(const std::string& path) {
    int fd = ::socket(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0);
    sockaddr_un addr{};
    addr.sun_family = AF_UNIX;
    std::strncpy(addr.sun_path, path.c_str(), sizeof(addr.sun_path) - 1);
    if (::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) != 0) {
      ::close(fd);
      throw std::runtime_error("connect " + path + ": " + std::strerror(errno));
    }
    return LineSocket(fd);
  }
  // address "tcp://127.0.0.1:1234" or "127.0.0.1:1234"
  static LineSocket tcp(std::string address) {
    if (address.rfind("tcp://", 0) == 0) address = address.substr(6);
    auto colon = address.rfind(':');
    int fd = ::socket(AF_INET, SOCK_STREAM | SOCK_CLOEXEC, 0);
    sockaddr_in addr{};
    addr.sin_family = AF_INET;
    addr.sin_port = htons(static_cast<uint16_t>(std::stoi(address.substr(colon + 1))));
    ::inet_pton(AF_INET, address.substr(0, colon).c_str(), &addr.sin_addr);
    if (::connect(fd, reinterpret_cast<sockaddr*>(&addr), sizeof(addr)) != 0) {
      ::close(fd);
      throw std::runtime_error("connect " + address + ": " + std::strerror(errno));
    }
    int one = 1;
    ::setsockopt(fd, IPPROTO_TCP, TCP_NODELAY, &one, sizeof(one));
    return LineSocket(fd);
  }
  LineSocket(LineSocket&& o) noexcept : fd_(o.fd_), buf_(std::move(o.buf_)) { o.fd_ = -1; }
  LineSocket(const LineSocket&) = delete;
  LineSocket& operator=(const LineSocket&) = delete;
  ~LineSocket() {
    if (fd_ >= 0) ::close(fd_);
  }

  bool write_all(std::string_view data) {
    while (!data.empty()) {
      ssize_t n = ::send(fd_, data.data(), data.size(), MSG_NOSIGNAL);
      if (n <= 0) return false;
      data.remove_prefix(static_cast<std::size_t>(n));
    }
    return true;
  }
  // Next line, or nullopt at EOF / timeout.
  std::optional<std::string> read_line(std::chrono::milliseconds timeout = 20s) {
    auto deadline = std::chrono::steady_clock::now() + timeout;
    for (;;) {
      auto nl = buf_.find('\n');
      if (nl != std::string::npos) {
        std::string line = buf_.substr(0, nl);
        buf_.erase(0, nl + 1);
        return line;
      }
      auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
      if (left.count() <= 0) return std::nullopt;
      pollfd p{fd_, POLLIN, 0};
      if (::poll(&p, 1, static_cast<int>(left.count())) <= 0) return std::nullopt;
      char chunk[65536];
      ssize_t n = ::recv(fd_, chunk, sizeof(chunk), 0);
      if (n <= 0) return std::nullopt;
      buf_.append(chunk, static_cast<std::size_t>(n));
    }
  }

 private:
  explicit LineSocket(int fd) : fd_(fd) {}
  int fd_;
  std::string buf_;
};

// echoline-sim with its endpoints and control port.
class Sim {
 public:
  explicit Sim(const std::string& lot, const std::string& bench = "instant.jsonc", const std::string& profile = "instant") {
    const auto src = testing::source_dir();
    proc_.emplace(testing::ChildProcess::start({testing::sim_binary().string(), "--config",
                                                (src / "config/sim" / bench).string(), "--lot",
                                                (src / "config/sim/lots" / lot).string(), "--profile", profile,
                                                "--log-level", "warn"}));
    for (;;) {
      auto line = proc_->read_line(20s);
      if (!line) throw std::runtime_error("echoline-sim did not print ready");
      if (*line == "ready") break;
      if (line->rfind("endpoint ", 0) == 0) {
        auto f = testing::parse_fields(*line);
        endpoints_[f["role"]] = f["address"];
      }
    }
    control_.emplace(LineSocket::tcp(endpoints_.at("control")));
  }
  const std::string& endpoint(const std::string& role) const { return endpoints_.at(role); }
  json control(const json& request) {
    control_->write_all(request.dump() + "\n");
    auto line = control_->read_line(20s);
    if (!line) throw std::runtime_error("sim control port: no reply to " + request.dump());
    return json::parse(*line);
  }
  void connect_standard(const std::string& s) { expect_ok(control({{"cmd", "connect"}, {"standard", s}})); }
  void connect_unit(const std::string& u) { expect_ok(control({{"cmd", "connect"}, {"unit", u}})); }
  std::vector<std::string> units() { return control({{"cmd", "units"}})["units"].get<std::vector<std::string>>(); }
  testing::ChildProcess& process() { return *proc_; }

 private:
  static void expect_ok(const json& r) {
    if (!r.value("ok", false)) throw std::runtime_error("sim control: " + r.dump());
  }
  std::optional<testing::ChildProcess> proc_;
  std::map<std::string, std::string> endpoints_;
  std::optional<LineSocket> control_;
};

// Writes a station config (source + receiver from the sim, no switch) into `dir`.
inline std::filesystem::path write_station_config(const std::filesystem::path& dir, const Sim& sim,
                                                  const std::string& recipe = "whip915.jsonc",
                                                  const std::string& extra_api = "") {
  const auto src = testing::source_dir();
  json cfg = {{"station", "e2e-bench"},
              {"data_dir", (dir / "data").string()},
              {"log_dir", (dir / "log").string()},
              {"recipe", (src / "config/recipes" / recipe).string()},
              {"calibration_kit", (src / "config/kits/sim-kit.jsonc").string()},
              {"fixture", {{"test_port_delay_ns", 2}}},
              {"instruments",
               {{{"role", "source"}, {"name", "siggen"}, {"address", sim.endpoint("source")},
                 {"profile", (src / "config/instruments/sim-source.jsonc").string()}},
                {{"role", "receiver"}, {"name", "analyzer"}, {"address", sim.endpoint("receiver")},
                 {"profile", (src / "config/instruments/sim-receiver.jsonc").string()}}}},
              {"api", {{"unix_socket", (dir / "echolined.sock").string()}}}};
  if (!extra_api.empty()) cfg["api"].update(json::parse(extra_api));
  auto file = dir / "station.jsonc";
  std::ofstream(file) << cfg.dump(2) << "\n";
  return file;
}

// echolined started on a config; waits for its "listening" line.
class Daemon {
 public:
  explicit Daemon(const std::filesystem::path& config, std::vector<std::string> extra = {}) {
    std::vector<std::string> argv{testing::daemon_binary().string(), "--config", config.string(), "--log-level", "warn"};
    argv.insert(argv.end(), extra.begin(), extra.end());
    proc_.emplace(testing::ChildProcess::start(argv));
    auto line = proc_->wait_for_line("listening ", 30s);
    if (!line) throw std::runtime_error("echolined did not print its listening line");
    auto f = testing::parse_fields(*line);
    unix_ = f["unix"];
    tcp_ = f["tcp"];
  }
  const std::string& unix_path() const { return unix_; }
  const std::string& tcp_address() const { return tcp_; }
  testing::ChildProcess& process() { return *proc_; }

 private:
  std::optional<testing::ChildProcess> proc_;
  std::string unix_, tcp_;
};

// A JSON-lines API client: replies by id, events queued.
class Api {
 public:
  explicit Api(LineSocket socket) : sock_(std::move(socket)) {}
  static Api connect(const Daemon& d) { return Api(LineSocket::unix_socket(d.unix_path())); }

  // Sends a request; returns its reply (events that arrive meanwhile are queued).
  json call(const std::string& name, json args = json::object()) {
    const int id = ++next_id_;
    send_raw(json({{"v", 1}, {"id", id}, {"call", name}, {"args", std::move(args)}}).dump() + "\n");
    return reply_for(id);
  }
  void send_raw(std::string_view text) { sock_.write_all(text); }
  json reply_for(const json& id) {
    for (;;) {
      json m = next_message(60s);
      if (m.contains("event")) {
        events_.push_back(m);
        continue;
      }
      if (m["id"] == id) return m;
      ADD_FAILURE() << "reply for another id: " << m.dump();
    }
  }
  // Next line as JSON (queued events first). Throws on timeout.
  json next_message(std::chrono::milliseconds timeout = 60s) {
    auto line = sock_.read_line(timeout);
    if (!line) throw std::runtime_error("api: no message within the timeout (or connection closed)");
    return json::parse(*line);
  }
  json next_event(std::chrono::milliseconds timeout = 60s) {
    if (!events_.empty()) {
      json e = events_.front();
      events_.pop_front();
      return e;
    }
    for (;;) {
      json m = next_message(timeout);
      if (m.contains("event")) return m;
      ADD_FAILURE() << "unexpected reply while waiting for an event: " << m.dump();
    }
  }
  // Raw read (for tests that send malformed lines). nullopt at EOF/timeout.
  std::optional<std::string> read_line(std::chrono::milliseconds timeout = 20s) { return sock_.read_line(timeout); }

 private:
  LineSocket sock_;
  int next_id_ = 0;
  std::deque<json> events_;
};

// Runs a calibration answering every prompt after connecting the standard on the sim.
// Returns the final event ("result" or "error").
inline json calibrate(Api& api, Sim& sim) {
  json r = api.call("cal.start");
  if (!r.value("ok", false)) throw std::runtime_error("cal.start refused: " + r.dump());
  for (;;) {
    json e = api.next_event();
    const std::string kind = e["event"];
    if (kind == "prompt") {
      sim.connect_standard(e["standard"]);
      json a = api.call("cal.answer", {{"standard", e["standard"]}});
      if (!a.value("ok", false)) throw std::runtime_error("cal.answer refused: " + a.dump());
    } else if (kind == "result" || kind == "error") {
      return e;
    }
  }
}

// Measures the check standard (cal.check), answering its prompt. Returns the final event.
inline json check_standard(Api& api, Sim& sim) {
  json r = api.call("cal.check");
  if (!r.value("ok", false)) throw std::runtime_error("cal.check refused: " + r.dump());
  for (;;) {
    json e = api.next_event();
    const std::string kind = e["event"];
    if (kind == "prompt") {
      sim.connect_standard(e["standard"]);
      (void)api.call("cal.answer", {{"standard", e["standard"]}});
    } else if (kind == "result" || kind == "error") {
      return e;
    }
  }
}

// Connects the unit on the sim and tests it; returns the "run" object of the result event.
// Calibrates / measures the check standard first when the daemon asks for it.
// `last_progress` (optional) gets the last progress event.
inline json test_unit(Api& api, Sim& sim, const std::string& serial, const std::string& lot = "",
                      int* progress_events = nullptr, json* last_progress = nullptr) {
  for (int attempt = 0; attempt < 3; ++attempt) {
    sim.connect_unit(serial);
    json r = api.call("test.start", {{"serial", serial}, {"lot", lot}, {"operator", "e2e"}});
    if (!r.value("ok", false)) {
      const std::string code = r["error"]["code"];
      if (code == "check_due") {
        json c = check_standard(api, sim);
        if (c["event"] != "result") throw std::runtime_error("check standard failed: " + c.dump());
        continue;
      }
      if (code == "calibration_due") {
        json c = calibrate(api, sim);
        if (c["event"] != "result") throw std::runtime_error("calibration failed: " + c.dump());
        continue;
      }
      throw std::runtime_error("test.start refused: " + r.dump());
    }
    for (;;) {
      json e = api.next_event();
      if (e["event"] == "progress") {
        if (progress_events) ++*progress_events;
        if (last_progress) *last_progress = e;
        continue;
      }
      if (e["event"] == "result") return e["run"];
      throw std::runtime_error("unexpected event: " + e.dump());
    }
  }
  throw std::runtime_error("test.start kept being refused for " + serial);
}

}  // namespace echoline::e2e
