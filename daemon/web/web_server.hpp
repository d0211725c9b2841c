// The page server inside echolined: the operator and supervisor pages, their assets (compiled
// in), the page API (POST /api, through the same ApiHandler and roles as the JSON-lines API),
// live events (server-sent events), the plot of one run and /metrics. cpp-httplib stays in the
// .cpp. Threading: its own listener thread and a pool of request threads; it reaches the sweep
// engine only through the ApiHandler, and the engine's events reach it through a ring that never
// makes the engine wait (event_bus.hpp).
#pragma once

#include <memory>
#include <string>

#include "daemon/service/api_handler.hpp"
#include "daemon/service/station.hpp"

namespace echoline::web {

struct WebOptions {
  std::string host = "127.0.0.1";   // web.host
  int port = 0;                     // web.port; -1 = any free port (tests)
  std::string token;                // the API token; required by non-loopback peers
};

class WebServer {
 public:
  // Installs the event tap on `handler`, binds the port and starts serving. Throws
  // std::runtime_error naming the address when it cannot listen, or when a non-loopback host
  // has no token. REQUIRES: handler and station outlive the server.
  WebServer(service::ApiHandler& handler, service::Station& station, WebOptions options);
  ~WebServer();   // stop()
  WebServer(const WebServer&) = delete;
  WebServer& operator=(const WebServer&) = delete;

  void stop();                       // ends every stream and the listener; idempotent
  std::string address() const;       // "127.0.0.1:8080"

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace echoline::web
