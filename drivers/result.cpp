// Names of error kinds, as they appear in logs, API replies and stored runs.
#include "drivers/result.hpp"

namespace echoline {

std::string_view to_string(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::timeout: return "timeout";
    case ErrorKind::io: return "io";
    case ErrorKind::closed: return "closed";
    case ErrorKind::protocol: return "protocol";
    case ErrorKind::instrument: return "instrument";
    case ErrorKind::config: return "config";
    case ErrorKind::invalid_argument: return "invalid-argument";
    case ErrorKind::unsafe: return "unsafe";
    case ErrorKind::cancelled: return "cancelled";
    case ErrorKind::storage: return "storage";
    case ErrorKind::internal: return "internal";
  }
  return "internal";
}

}  // namespace echoline
