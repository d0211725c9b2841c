// Fault injection for one simulated instrument: which faults are armed (no reply, slow reply,
// dropped connection, garbled reply, spurious error entry, wrong identity), each with its own
// probability and seeded generator so a run is reproducible. Pure: no I/O, no clock.
// Threading: single-threaded (the server's io thread).
#pragma once

#include <cstdint>
#include <optional>
#include <random>
#include <string>
#include <string_view>
#include <vector>

namespace echoline::sim {

enum class FaultKind {
  no_reply,        // the reply is swallowed: the client times out
  slow_reply,      // the reply comes delay_ms late
  drop,            // the connection is closed instead of replying
  garble,          // some characters of the reply are replaced
  error_entry,     // a spurious entry is pushed into the instrument's error queue
  wrong_identity,  // the *IDN? reply names another instrument
};

// "no-reply", "slow-reply", "drop", "garble", "error-entry", "wrong-identity".
std::string_view to_string(FaultKind kind);
std::optional<FaultKind> parse_fault_kind(std::string_view text);
// All kinds, as their names, comma-separated (for messages and --help).
std::string fault_kind_names();

struct FaultSpec {
  FaultKind kind = FaultKind::no_reply;
  double probability = 1.0;       // chance per reply (per program message for error-entry), 0..1
  std::uint64_t seed = 1;         // seeds this fault's own std::mt19937_64
  double delay_ms = 500;          // slow-reply: added delay, ms
  int error_code = -310;          // error-entry: SCPI code pushed (SCPI-99 -310 "System error")
  std::string error_message = "System error;simulated fault";  // error-entry text, no quotes
  std::string identity = "Echoline,SIM-NONE,NONE0000,0.0";     // wrong-identity: *IDN? text
};

// What the server does with one reply after the faults had their say.
struct ReplyPlan {
  bool send = true;                 // false: swallow the reply (no-reply, drop)
  bool drop_connection = false;     // close the connection instead of replying
  std::string text;                 // possibly garbled or replaced, no terminator
  double extra_delay_s = 0;         // slow-reply
  std::vector<FaultKind> applied;   // which faults fired (for logs and counters)
};

// A spurious error to push into the instrument's queue.
struct ErrorEntry {
  int code = 0;
  std::string message;
};

// The armed faults of one instrument. Each armed fault keeps its own generator, so the
// sequence of firings depends only on its seed and the number of rolls.
class FaultSet {
 public:
  // Arms a fault; a fault of the same kind already armed is replaced (generator reseeded).
  void arm(const FaultSpec& spec);
  // Disarms one kind (no-op if not armed) or all.
  void disarm(FaultKind kind);
  void clear();
  bool empty() const { return armed_.empty(); }
  std::vector<FaultSpec> specs() const;
  std::uint64_t fired(FaultKind kind) const;   // how often this kind fired since armed

  // Called once per program message, before the instrument handles it: error entries to push.
  std::vector<ErrorEntry> on_message();
  // Called once per reply. `is_identity` tells whether this reply answers *IDN?.
  ReplyPlan on_reply(std::string text, bool is_identity);

 private:
  struct Armed {
    FaultSpec spec;
    std::mt19937_64 rng;
    std::uint64_t fired = 0;
  };
  Armed* find(FaultKind kind);
  static bool roll(Armed& armed);     // true with armed.spec.probability
  static void garble(std::string& text, std::mt19937_64& rng);

  std::vector<Armed> armed_;
};

}  // namespace echoline::sim
