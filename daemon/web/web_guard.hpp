// What the page server lets through, as pure decisions: which Host a request may name (no DNS
// rebinding onto loopback), which Origin may change something (no cross-site requests), the
// security headers every answer carries, and tokens for sessions. Thread-safe.
#pragma once

#include <string>
#include <string_view>

namespace echoline::web {

// Content-Security-Policy of every page: the page's own scripts, styles and images only; no
// inline script, no framing, nothing fetched from anywhere else.
inline constexpr const char* kPageCsp =
    "default-src 'none'; script-src 'self'; style-src 'self'; img-src 'self'; connect-src 'self'; "
    "base-uri 'none'; form-action 'none'; frame-ancestors 'none'";
// The plot images carry their own inline <style> (shared with the lot report) and no script.
inline constexpr const char* kImageCsp = "default-src 'none'; style-src 'unsafe-inline'; frame-ancestors 'none'";

// The header a page must send with every request that changes something. A cross-site form
// cannot set it, and a cross-site script cannot send it without a CORS preflight, which this
// server never grants.
inline constexpr const char* kSessionHeader = "X-Echoline-Session";

// True for 127.0.0.0/8, ::1 and ::ffff:127.x.
bool is_loopback_address(std::string_view address);

// A request from a loopback peer must name the station by a loopback name (127.0.0.1, [::1],
// localhost) or by the configured host, with the listening port: a page from another site
// whose name was pointed at 127.0.0.1 (DNS rebinding) is refused.
bool host_allowed(std::string_view host_header, std::string_view configured_host, int port, bool peer_loopback);

// A state-changing request: the Origin header, when present, must be this server's origin
// ("http://" + Host). Browsers always send it on POST from a script.
bool origin_allowed(std::string_view origin_header, std::string_view host_header);

// 128 random bits as 32 hex digits (std::random_device).
std::string random_token();

}  // namespace echoline::web
