// ScpiSession: the SCPI message layer over one Transport (terminators, queries, # blocks,
// *OPC?, the SYSTem:ERRor? queue). Owns its transport. Threading: one command in flight,
// one user thread at a time; not copyable. Logs every exchange at trace level with its round trip.
#pragma once

#include <cstddef>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/result.hpp"
#include "drivers/scpi_codec.hpp"
#include "drivers/transport.hpp"

namespace echoline::drivers {

struct SessionOptions {
  std::string write_terminator = "\n";        // appended to every command
  char read_terminator = '\n';                // ends every reply
  Millis timeout{2000};                       // per call (write, each read)
  Millis opc_timeout{30000};                  // *OPC? waits this long
  std::size_t max_reply_bytes = 16u << 20;    // longer replies / blocks are ErrorKind::protocol
};

// SCPI on any transport. One command in flight; one user thread at a time.
// Errors name instrument, address, command and (when relevant) the reply.
class ScpiSession {
 public:
  ScpiSession(std::string instrument_name, std::unique_ptr<Transport> transport, SessionOptions options = {});
  ScpiSession(const ScpiSession&) = delete;
  ScpiSession& operator=(const ScpiSession&) = delete;
  ~ScpiSession();

  Status connect();                    // opens the transport (timeout from options)
  Status reconnect();                  // closes and opens again
  void close();
  bool is_open() const;

  Status write(std::string_view command);                         // command + write terminator, no reply
  Result<std::string> query(std::string_view command);            // one reply line, terminator stripped
  Result<double> query_number(std::string_view command);
  Result<std::vector<double>> query_numbers(std::string_view command);
  Result<std::string> query_block(std::string_view command);     // payload of a definite or indefinite block
  Result<std::vector<double>> query_real_block(std::string_view command, int bits, scpi::ByteOrder order);
  Result<scpi::Identity> identify();          // *IDN?
  Status wait_complete();                     // *OPC? with opc_timeout
  // `commands` and *OPC? sent as ONE program message ("A;*OPC?"), answered like wait_complete.
  // One write and one reply instead of two writes: the pipelined form of "send, then wait".
  Status wait_complete_after(std::string_view commands);
  Status drain_errors();                      // SYST:ERR? until 0; first error -> ErrorKind::instrument, instrument_code set
  Status clear();                             // *CLS
  Status reset();                             // *RST

  const std::string& name() const;
  std::string address() const;
  const SessionOptions& options() const;

 private:
  Result<std::string> exchange(std::string_view command, Millis timeout);
  Result<std::string> read_block_payload(std::string_view command);
  Error describe(const Error& error, std::string_view command) const;

  std::string name_;
  std::unique_ptr<Transport> transport_;
  SessionOptions options_;
  std::string last_command_;   // the command before the current one (named by drain_errors)
};

}  // namespace echoline::drivers
