// TcpEndpoint: a listening TCP socket that serves every accepted connection with one LineService
// (a simulated instrument or the control port). Owns the acceptor and its connections.
// Threading: construct, start, stop and destroy on the thread that runs the io_context.
#pragma once

#include <memory>
#include <string>

namespace asio {
class io_context;
}

namespace echoline::sim {

class LineService;

class TcpEndpoint {
 public:
  // Binds host:port (port 0 picks a free one) and listens. Throws std::runtime_error
  // "<role>: cannot listen on <host>:<port>: <reason>" at this start-up edge.
  // REQUIRES: io and service outlive the endpoint.
  TcpEndpoint(asio::io_context& io, const std::string& host, int port, LineService& service);
  ~TcpEndpoint();
  TcpEndpoint(const TcpEndpoint&) = delete;
  TcpEndpoint& operator=(const TcpEndpoint&) = delete;

  void start();                 // begins accepting
  void stop();                  // stops accepting and closes every connection
  std::string address() const;  // "tcp://127.0.0.1:40111" (the port actually bound)
  int port() const;

 private:
  struct Impl;
  std::shared_ptr<Impl> impl_;
};

}  // namespace echoline::sim
