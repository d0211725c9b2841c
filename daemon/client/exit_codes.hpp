// Exit codes of the `echoline` client, one meaning each (documented in `echoline --help` and
// daemon/client/README.md). Constants only; thread-safe.
#pragma once

#include <string_view>

namespace echoline::client {

inline constexpr int kExitOk = 0;            // done: the console session ended normally (whatever the
                                             // verdicts), the command did its job, no errors found
inline constexpr int kExitNegative = 1;      // a negative answer: the check found errors, nothing stored
                                             // under that key, or the daemon refused the request
inline constexpr int kExitUsage = 2;         // bad command line, bad config file, bad token
inline constexpr int kExitUnreachable = 3;   // the daemon could not be reached or the link dropped
inline constexpr int kExitInstrument = 4;    // instrument trouble (status: an instrument is NOT READY)
inline constexpr int kExitStorage = 5;       // the run store could not be read or written (missing, unreadable)

// Maps an API error code (daemon/service/API.md) to the exit code above.
int exit_code_for_api_error(std::string_view code);

}  // namespace echoline::client
