// Waiting for a lost daemon to come back: the retry schedule (1 s, 2 s, 4 s, then every 5 s),
// the progress shown while waiting (a counter redrawn in place on a terminal, one line per
// attempt on a pipe) and the give-up deadline. Blocks the calling thread; one thread.
#pragma once

#include <chrono>
#include <ostream>

#include "daemon/client/api_client.hpp"

namespace echoline::client {

using Seconds = std::chrono::seconds;

struct ReconnectPolicy {
  Seconds timeout{0};        // give up after this long; 0 = keep retrying forever
  bool output_is_tty = false;
};

// Delay before attempt `attempt` (1-based): 1 s, 2 s, 4 s, then 5 s for every later attempt.
Seconds reconnect_delay(int attempt);

struct ReconnectOutcome {
  bool back = false;          // the daemon answered hello again
  int attempts = 0;
  Seconds waited{0};
  Error last_error;           // why the last attempt failed (when !back)
};

// Sleeps and calls api.reconnect() on the schedule above until it succeeds or the policy's
// timeout has passed, writing the waiting progress to `out`.
ReconnectOutcome wait_for_daemon(ApiClient& api, std::ostream& out, const ReconnectPolicy& policy);

}  // namespace echoline::client
