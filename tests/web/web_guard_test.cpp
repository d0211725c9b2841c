// The page server's pure parts: which Host and Origin may reach the station, the event ring's
// catch-up rule, and OpenMetrics label escaping.
#include <gtest/gtest.h>

#include "daemon/web/event_bus.hpp"
#include "daemon/web/metrics.hpp"
#include "daemon/web/web_guard.hpp"

namespace echoline::web {
namespace {

TEST(WebGuard, LoopbackAddressesAreRecognised) {
  EXPECT_TRUE(is_loopback_address("127.0.0.1"));
  EXPECT_TRUE(is_loopback_address("127.10.0.3"));   // all of 127.0.0.0/8 (RFC 1122 §3.2.1.3)
  EXPECT_TRUE(is_loopback_address("::1"));
  EXPECT_TRUE(is_loopback_address("::ffff:127.0.0.1"));
  EXPECT_FALSE(is_loopback_address("10.0.0.7"));
  EXPECT_FALSE(is_loopback_address("128.0.0.1"));
}

TEST(WebGuard, LoopbackPeerMustNameTheStation) {
  EXPECT_TRUE(host_allowed("127.0.0.1:8915", "127.0.0.1", 8915, true));
  EXPECT_TRUE(host_allowed("localhost:8915", "127.0.0.1", 8915, true));
  EXPECT_TRUE(host_allowed("[::1]:8915", "127.0.0.1", 8915, true));
  // Another site's name pointed at 127.0.0.1 (DNS rebinding), or the wrong port.
  EXPECT_FALSE(host_allowed("evil.example:8915", "127.0.0.1", 8915, true));
  EXPECT_FALSE(host_allowed("127.0.0.1:8916", "127.0.0.1", 8915, true));
  EXPECT_FALSE(host_allowed("", "127.0.0.1", 8915, true));
  // The configured name is the station's own.
  EXPECT_TRUE(host_allowed("bench-1.line2:8915", "bench-1.line2", 8915, true));
  // A remote peer is held to the token instead.
  EXPECT_TRUE(host_allowed("bench-1.plant:8915", "0.0.0.0", 8915, false));
}

TEST(WebGuard, OnlyThePagesOwnOriginMayPost) {
  EXPECT_TRUE(origin_allowed("http://127.0.0.1:8915", "127.0.0.1:8915"));
  EXPECT_TRUE(origin_allowed("", "127.0.0.1:8915"));   // not a browser page
  EXPECT_FALSE(origin_allowed("http://evil.example", "127.0.0.1:8915"));
  EXPECT_FALSE(origin_allowed("null", "127.0.0.1:8915"));   // sandboxed frame, file: page
  EXPECT_FALSE(origin_allowed("https://127.0.0.1:8915", "127.0.0.1:8915"));
}

TEST(WebGuard, SessionTokensAreLongAndDiffer) {
  const std::string a = random_token(), b = random_token();
  EXPECT_EQ(a.size(), 32u);
  EXPECT_NE(a, b);
}

TEST(EventBus, ReaderGetsEventsAfterItsCursor) {
  EventBus bus(8);
  bus.publish("{\"n\":1}");
  bus.publish("{\"n\":2}");
  bool lost = true;
  auto got = bus.wait_after(1, std::chrono::milliseconds(0), lost);
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0].seq, 2u);
  EXPECT_EQ(got[0].data, "{\"n\":2}");
  EXPECT_FALSE(lost);
}

TEST(EventBus, SlowReaderIsToldItLostEvents) {
  EventBus bus(4);
  for (int i = 0; i < 10; ++i) bus.publish("{}");
  bool lost = false;
  auto got = bus.wait_after(2, std::chrono::milliseconds(0), lost);
  EXPECT_TRUE(lost);
  ASSERT_EQ(got.size(), 4u);   // the ring keeps the latest 4
  EXPECT_EQ(got.front().seq, 7u);
  EXPECT_EQ(bus.last_seq(), 10u);
}

TEST(EventBus, StopWakesReadersWithNothing) {
  EventBus bus;
  bus.stop();
  bool lost = false;
  EXPECT_TRUE(bus.wait_after(0, std::chrono::seconds(5), lost).empty());
  EXPECT_TRUE(bus.stopped());
}

TEST(Metrics, LabelValuesAreEscaped) {
  // OpenMetrics 1.0, "Escaping": backslash, double quote and line feed.
  EXPECT_EQ(escape_label("a\"b\\c\nd"), "a\\\"b\\\\c\\nd");
}

TEST(Metrics, HistogramBucketsAreCumulativeAndEndInEof) {
  CycleHistogram h(1.0e9);
  h.observe(0.3);
  h.observe(0.3);
  h.observe(40);   // above every bound: only +Inf
  MetricsInput in;
  in.station = "bench";
  in.cycles = h.snapshot();
  const std::string text = render_openmetrics(in);
  EXPECT_NE(text.find("echoline_cycle_seconds_bucket{station=\"bench\",le=\"0.25\"} 0\n"), std::string::npos) << text;
  EXPECT_NE(text.find("echoline_cycle_seconds_bucket{station=\"bench\",le=\"0.5\"} 2\n"), std::string::npos) << text;
  EXPECT_NE(text.find("echoline_cycle_seconds_bucket{station=\"bench\",le=\"30.0\"} 2\n"), std::string::npos) << text;
  EXPECT_NE(text.find("echoline_cycle_seconds_bucket{station=\"bench\",le=\"+Inf\"} 3\n"), std::string::npos) << text;
  EXPECT_NE(text.find("echoline_cycle_seconds_count{station=\"bench\"} 3\n"), std::string::npos) << text;
  EXPECT_EQ(text.substr(text.size() - 6), "# EOF\n");
}

}  // namespace
}  // namespace echoline::web
