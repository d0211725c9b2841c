// systemd readiness notification without libsystemd: one datagram to $NOTIFY_SOCKET.
// Edge I/O; thread-safe (no shared state).
#pragma once

#include <string_view>

namespace echoline::service {

// Sends `state` (e.g. "READY=1", "STOPPING=1") when $NOTIFY_SOCKET is set. Returns true when
// sent, false when not under systemd or on error (never fatal).
bool sd_notify_state(std::string_view state);

}  // namespace echoline::service
