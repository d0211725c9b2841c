// Test support for the echoline-sim process tests: start the real binary with a config, collect
// the endpoint lines it prints, talk to its control port through a real TCP transport.
// One test thread per RunningSim.
#pragma once

#include <fstream>
#include <map>
#include <optional>
#include <stdexcept>
#include <string>
#include <vector>

#include <gtest/gtest.h>
#include <nlohmann/json.hpp>

#include "drivers/scpi_session.hpp"
#include "drivers/transport.hpp"
#include "tests/support/process.hpp"

namespace echoline::sim::testing {

using echoline::testing::ChildProcess;
using echoline::testing::TempDir;
using nlohmann::json;

inline std::filesystem::path repo_file(const std::string& relative) {
  return echoline::testing::source_dir() / relative;
}

// Reads a JSONC config of the repo as JSON (comments dropped) so a test can change it.
inline json read_config(const std::string& relative) {
  std::ifstream in(repo_file(relative));
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  return json::parse(text, nullptr, true, /*ignore_comments=*/true);
}

// Writes `config` into `dir` and returns its path. A relative "lot" is made absolute against
// config/sim/ (where the repo configs keep it relative).
inline std::filesystem::path write_config(const TempDir& dir, json config, const std::string& name = "sim.jsonc") {
  if (config.contains("lot") && config["lot"].is_string()) {
    std::filesystem::path lot(config["lot"].get<std::string>());
    if (lot.is_relative()) config["lot"] = (repo_file("config/sim") / lot).string();
  }
  const auto path = dir / name;
  std::ofstream(path) << config.dump(2) << "\n";
  return path;
}

class RunningSim {
 public:
  // Starts echoline-sim with `args` (after the binary), waits for "ready" and records every
  // "endpoint" line. Fails the test (and returns with ok() false) when "ready" never comes.
  explicit RunningSim(std::vector<std::string> args) {
    std::vector<std::string> argv{echoline::testing::sim_binary().string()};
    argv.insert(argv.end(), args.begin(), args.end());
    proc_.emplace(ChildProcess::start(argv));
    for (;;) {
      auto line = proc_->read_line(std::chrono::seconds(20));
      if (!line) break;
      if (*line == "ready") {
        ready_ = true;
        break;
      }
      if (line->rfind("endpoint ", 0) == 0) {
        auto fields = echoline::testing::parse_fields(*line);
        endpoints_[fields["role"] + "/" + fields["transport"]] = fields;
      }
    }
  }

  bool ok() const { return ready_; }
  ChildProcess& process() { return *proc_; }
  bool has(const std::string& role_transport) const { return endpoints_.count(role_transport) != 0; }
  // "source/tcp" -> "tcp://127.0.0.1:40111"; "receiver/pty" -> "serial:/dev/pts/7?baud=115200".
  std::string address(const std::string& role_transport) const {
    auto it = endpoints_.find(role_transport);
    if (it == endpoints_.end()) throw std::runtime_error("no endpoint " + role_transport);
    return it->second.at("address");
  }
  const std::map<std::string, std::map<std::string, std::string>>& endpoints() const { return endpoints_; }

  // A connected SCPI session to one endpoint.
  std::unique_ptr<drivers::ScpiSession> session(const std::string& role_transport,
                                                drivers::SessionOptions options = {}) {
    auto transport = drivers::make_transport(address(role_transport), role_transport);
    if (!transport.ok()) throw std::runtime_error(transport.error().message);
    auto s = std::make_unique<drivers::ScpiSession>(role_transport, std::move(transport.value()), options);
    if (auto st = s->connect(); !st.ok()) throw std::runtime_error(st.error().message);
    return s;
  }

  // One control-port request; the reply as JSON (throws if the port does not answer).
  json control(const json& request) { return control_raw(request.dump()); }
  json control_raw(const std::string& line) {
    if (!control_) {
      auto t = drivers::make_transport(address("control/tcp"), "control");
      if (!t.ok()) throw std::runtime_error(t.error().message);
      control_ = std::move(t.value());
      if (auto st = control_->open(std::chrono::milliseconds(2000)); !st.ok()) throw std::runtime_error(st.error().message);
    }
    if (auto st = control_->write(line + "\n", std::chrono::milliseconds(2000)); !st.ok()) {
      throw std::runtime_error(st.error().message);
    }
    auto reply = control_->read_until('\n', std::chrono::milliseconds(5000), 1u << 22);
    if (!reply.ok()) throw std::runtime_error(reply.error().message);
    return json::parse(reply.value());
  }

 private:
  std::optional<ChildProcess> proc_;
  std::map<std::string, std::map<std::string, std::string>> endpoints_;
  std::unique_ptr<drivers::Transport> control_;
  bool ready_ = false;
};

}  // namespace echoline::sim::testing
