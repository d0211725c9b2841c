// SimInstrument: one simulated SCPI instrument (source, receiver or switch) answering program
// messages as text. Pure: no sockets, no clock of its own (World::now_s), no threads.
// Threading: single-threaded; the server calls handle() from its one io thread.
#pragma once

#include <cstdint>
#include <memory>
#include <string>
#include <string_view>
#include <utility>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "simulator/world.hpp"

namespace echoline::sim {

// One response message unit for one query in a program message.
struct Reply {
  bool has_reply = false;
  std::string text;        // response data, no terminator
  double delay_s = 0;      // modelled time before this reply can be read (e.g. *OPC? after
                           // INIT waits for the sweep); the server may scale it (instant = 0)
};

class SimInstrument {
 public:
  virtual ~SimInstrument() = default;

  // One program message (one line, terminator stripped). Returns one Reply per query in the
  // message, in order. Errors go into the instrument's error queue (SYSTem:ERRor?).
  virtual std::vector<Reply> handle(std::string_view program_message) = 0;

  // "source" | "receiver" | "switch".
  virtual std::string role() const = 0;

  // The *IDN? text: "<manufacturer>,<model>,<serial>,<firmware>".
  virtual std::string identity() const = 0;

  // IEEE 488.2 §6.3.2.3 (from memory): a new program message arrived while a response was
  // still unread. The server calls this before handle() when it discards an unread reply;
  // the instrument queues -410 "Query INTERRUPTED".
  virtual void query_interrupted() = 0;

  // IEEE 488.2 §6.3.2.2 (from memory): the controller read with no query pending. The server
  // calls this when a read arrives with nothing to send; the instrument queues -420
  // "Query UNTERMINATED". (On a socket there is no explicit read request, so servers that
  // cannot see reads simply never call this.)
  virtual void query_unterminated() = 0;

  // Pushes an error entry into the queue (fault injection, "error-entry"). code < 0 standard,
  // > 0 device-specific; message without quotes.
  virtual void push_error(int code, std::string message) = 0;
};

// Factories. Config keys (JSON numbers in SI units unless the key says otherwise); missing keys
// take the default shown. Throw std::invalid_argument naming the key on a wrong type/value
// (an edge: config load at startup).
//
// make_source_instrument:
//   "identity"            string  "Echoline,SIM-SRC,SRC0001,1.0"  *IDN? (4 fields, <= 72 chars)
//   "frequency_range_hz"  [lo,hi] [9e3, 6e9]        allowed CW frequency, Hz
//   "power_range_dbm"     [lo,hi] [-110, 20]        allowed level, dBm
//   "settle_s"            number  0.002             settling time after any change, s
//   "level_accuracy_db"   number  0.3               std dev of the fixed level offset, dB
//                                                   (plus ~1 % of it per setting), dB
//   "seed"                integer 7                 seeds the level errors
// make_receiver_instrument:
//   "identity"            string  "Echoline,SIM-SA,SA0001,1.0"
//   "frequency_range_hz"  [lo,hi] [9e3, 6e9]        allowed center/start/stop, Hz
//   "noise_figure_db"     number  24                receiver noise figure, dB
//   "max_safe_input_dbm"  number  20                above this the input overloads (reading
//                                                   limited, error -300 queued). A real
//                                                   analyzer is DAMAGED above its max safe
//                                                   input; keep real benches below it.
//   "compression_dbm"     number  max_safe_input_dbm  reading is limited to this level
//   "reading_noise_db"    number  0.05              std dev of reading noise on strong tones, dB
//   "seed"                integer 7                 seeds reading noise
// make_switch_instrument:
//   "identity"            string  "Echoline,SIM-SW,SW0001,1.0"
//   "positions"           object  {"1":"OPEN","2":"SHORT","3":"LOAD","4":"DUT","5":"MISMATCH-A","6":"MISMATCH-B"}
//                                 channel number -> what it connects: OPEN|SHORT|LOAD|MISMATCH-A|MISMATCH-B connect
//                                 that standard; DUT leaves the World's connected DUT alone
//                                 (the server's control port connects units); DUT-OFFSET
//                                 does the same with the DUT behind the offset line
//                                 (World::standards.offset_line, World::via_offset_line)
//   "load_return_loss_db" number  (none)           RL of the LOAD standard at 1 GHz, dB (6 .. 80);
//                                 when given it sets World::standards.load_return_loss_db
//                                 (the bench file's "standards" key, which must then agree)
std::unique_ptr<SimInstrument> make_source_instrument(World& world, const nlohmann::json& config);
std::unique_ptr<SimInstrument> make_receiver_instrument(World& world, const nlohmann::json& config);
std::unique_ptr<SimInstrument> make_switch_instrument(World& world, const nlohmann::json& config);

// For the instrument implementations: config reading (throw std::invalid_argument naming the
// key and what is wrong) and seeded deterministic noise.
namespace detail {
double config_number(const nlohmann::json& config, const char* key, double fallback);
// [lo, hi] with lo < hi.
std::pair<double, double> config_range(const nlohmann::json& config, const char* key, std::pair<double, double> fallback);
std::uint64_t config_seed(const nlohmann::json& config, std::uint64_t fallback);
// "identity": four comma-separated fields of ASCII 0x20-0x7E without ';', <= 72 characters
// (IEEE 488.2 §10.14, section number from memory).
std::string config_identity(const nlohmann::json& config, const std::string& fallback);
// A standard normal value that depends only on (seed, a, b): the same setting always gets the
// same error (splitmix64 hashing + Box-Muller).
double hashed_normal(std::uint64_t seed, double a, double b);
}  // namespace detail

}  // namespace echoline::sim
