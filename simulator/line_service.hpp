// LineService: what an endpoint connection hands each received line to (a simulated instrument
// or the control port), and what comes back: bytes to send after a delay, or a hang-up.
// Pure interface, no Asio. Threading: called only from the server's io thread.
#pragma once

#include <string>
#include <string_view>
#include <vector>

namespace echoline::sim {

// One thing a connection must do, in order after the previous one.
struct Outgoing {
  std::string bytes;          // with terminator; empty with hang_up
  double delay_s = 0;         // real seconds after the line arrived before it may be sent
  bool hang_up = false;       // close the connection here (everything after is discarded)
};

class LineService {
 public:
  virtual ~LineService() = default;
  // One line as received, terminator (LF, and a CR before it) stripped. `peer` names the
  // connection in logs ("tcp 127.0.0.1:51234", "pty /dev/pts/7").
  virtual std::vector<Outgoing> on_line(std::string_view line, const std::string& peer) = 0;
  // What this service is, for logs: "source", "receiver", "switch", "control".
  virtual const std::string& role() const = 0;
  // A connection opened or closed (logging, counters).
  virtual void on_connect(const std::string& peer) { (void)peer; }
  virtual void on_disconnect(const std::string& peer) { (void)peer; }
};

}  // namespace echoline::sim
