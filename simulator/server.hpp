// Server: one echoline-sim process. Owns the io_context (one thread), the simulated World, the
// instruments with their hosts and endpoints (TCP and/or pty), the control port and the signal
// handling. Construction binds everything; run() serves until SIGTERM/SIGINT or stop().
// Threading: construct, run and destroy on one thread; the instruments never see another.
#pragma once

#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "simulator/physics/lot.hpp"
#include "simulator/sim_config.hpp"

namespace echoline::sim {

class Server {
 public:
  // Builds the bench from `config` (latency profile already chosen) with `lot` (may be empty).
  // Throws drivers::ConfigError for bad instrument settings (file, line, key), and
  // std::runtime_error when an endpoint cannot be opened (port in use, pty unavailable).
  Server(SimConfig config, std::optional<Lot> lot);
  ~Server();
  Server(const Server&) = delete;
  Server& operator=(const Server&) = delete;

  // One line per endpoint, in the process contract's format:
  //   "endpoint role=source transport=tcp address=tcp://127.0.0.1:40111"
  //   "endpoint role=receiver transport=pty address=serial:/dev/pts/7?baud=115200 link=/tmp/sa"
  std::vector<std::string> endpoint_lines() const;

  // Serves until SIGTERM or SIGINT (or stop()), then closes every endpoint. Returns 0.
  int run();
  // Asks run() to return (from the io thread, e.g. a handler).
  void stop();

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace echoline::sim
