// The API's sockets: a Unix stream socket and an optional TCP listener, each connection framed
// into lines (at most kMaxLineBytes) handed to the ApiHandler. Asio stays inside the .cpp.
// Threading: run() drives one io thread; stop_accepting()/stop() are safe from any thread;
// replies and events are queued onto the io thread.
#pragma once

#include <filesystem>
#include <memory>
#include <string>

#include "daemon/service/api_handler.hpp"

namespace echoline::service {

struct ServerOptions {
  std::filesystem::path unix_socket;        // "" = no Unix socket
  unsigned socket_mode = 0660;              // permissions of the Unix socket file
  std::string tcp_host = "127.0.0.1";
  int tcp_port = 0;                         // 0 = no TCP listener; -1 = any free port (tests)
  bool token_configured = false;            // a non-loopback TCP listener needs one
};

class ApiServer {
 public:
  // Binds the listeners (removing a stale Unix socket; refusing one a live daemon answers).
  // Throws std::runtime_error naming the address on failure. REQUIRES: handler outlives the server.
  static std::unique_ptr<ApiServer> create(ApiHandler& handler, const ServerOptions& options);
  virtual ~ApiServer() = default;
  ApiServer(const ApiServer&) = delete;
  ApiServer& operator=(const ApiServer&) = delete;

  virtual void run() = 0;              // serves until stop(); call from one thread
  virtual void stop_accepting() = 0;   // closes the listeners (and removes the socket file)
  virtual void stop() = 0;             // closes every connection; run() returns
  virtual std::string unix_path() const = 0;     // "" when none
  virtual std::string tcp_address() const = 0;   // "127.0.0.1:40123", "" when none

 protected:
  ApiServer() = default;
};

}  // namespace echoline::service
