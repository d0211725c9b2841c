// Test-only hooks (test_hooks.hpp); empty unless ECHOLINE_TEST_HOOKS is defined.
#include "daemon/service/test_hooks.hpp"

#include <charconv>
#include <chrono>
#include <cstdlib>
#include <string_view>
#include <thread>

#include <spdlog/spdlog.h>

namespace echoline::service::test_hooks {

#ifdef ECHOLINE_TEST_HOOKS

namespace {

int hang_point_from_environment() {
  const char* text = std::getenv("ECHOLINE_TEST_HANG_AT_POINT");
  if (text == nullptr) return 0;
  const std::string_view s(text);
  int n = 0;
  auto [end, ec] = std::from_chars(s.data(), s.data() + s.size(), n);
  return ec == std::errc() && end == s.data() + s.size() && n > 0 ? n : 0;
}

}  // namespace

void hang_after_point(int point) {
  static const int hang_at = hang_point_from_environment();
  if (hang_at == 0 || point != hang_at) return;
  spdlog::warn("TEST HOOK: ECHOLINE_TEST_HANG_AT_POINT={}: the sweep engine hangs here with RF on", hang_at);
  for (;;) std::this_thread::sleep_for(std::chrono::hours(1));
}

#else

void hang_after_point(int) {}

#endif

}  // namespace echoline::service::test_hooks
