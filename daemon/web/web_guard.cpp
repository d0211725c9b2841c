// Host and Origin checks, loopback test and session tokens for the page server.
#include "daemon/web/web_guard.hpp"

#include <random>

#include <fmt/format.h>

namespace echoline::web {

bool is_loopback_address(std::string_view a) {
  if (a.rfind("::ffff:", 0) == 0) a.remove_prefix(7);
  return a == "::1" || a.rfind("127.", 0) == 0;
}

bool host_allowed(std::string_view host, std::string_view configured_host, int port, bool peer_loopback) {
  if (host.empty()) return false;
  const std::string p = fmt::format(":{}", port);
  for (std::string_view name : {std::string_view("127.0.0.1"), std::string_view("localhost"), std::string_view("[::1]")}) {
    if (host == std::string(name) + p) return true;
  }
  const bool configured_is_any = configured_host == "0.0.0.0" || configured_host == "::";
  if (!configured_is_any && host == std::string(configured_host) + p) return true;
  // A remote peer reaches a non-loopback listener by whatever name the plant's network gives the
  // station; it is held to the token instead.
  return !peer_loopback;
}

bool origin_allowed(std::string_view origin, std::string_view host) {
  if (origin.empty()) return true;   // not from a browser page (curl, a script on the station)
  return origin == "http://" + std::string(host);
}

std::string random_token() {
  std::random_device rd;
  std::string out;
  for (int i = 0; i < 4; ++i) out += fmt::format("{:08x}", static_cast<unsigned>(rd()));
  return out;
}

}  // namespace echoline::web
