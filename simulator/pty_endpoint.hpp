// PtyEndpoint: a pseudo-terminal whose slave side looks like the instrument's serial port; the
// server reads and writes the master. Optional symlink to the slave (removed on destruction).
// Owns the master fd. Threading: construct, start, stop and destroy on the io thread.
#pragma once

#include <memory>
#include <string>

namespace asio {
class io_context;
}

namespace echoline::sim {

class LineService;

class PtyEndpoint {
 public:
  // Opens a pty pair (posix_openpt), puts the slave in raw mode, creates `link` (if not empty)
  // pointing at the slave. A stale symlink at `link` is replaced; any other file there is an
  // error. Throws std::runtime_error "<role>: pty: <what>: <reason>" at this start-up edge.
  // `baud` only goes into address(): a pty does not emulate line speed.
  PtyEndpoint(asio::io_context& io, LineService& service, std::string link, int baud);
  ~PtyEndpoint();
  PtyEndpoint(const PtyEndpoint&) = delete;
  PtyEndpoint& operator=(const PtyEndpoint&) = delete;

  void start();                       // begins serving (polls while no client has the slave open)
  void stop();                        // stops serving and closes the master
  const std::string& device() const;  // "/dev/pts/7"
  const std::string& link() const;    // "" when none
  std::string address() const;        // "serial:/dev/pts/7?baud=115200"

 private:
  struct Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace echoline::sim
