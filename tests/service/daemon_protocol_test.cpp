// The API's pure parts: request parsing (API.md), reply lines, token comparison, linear-power
// averaging of readings, UTC time text.
#include <cmath>
#include <variant>

#include <gtest/gtest.h>

#include "daemon/service/api_handler.hpp"
#include "daemon/service/api_protocol.hpp"
#include "daemon/service/clock.hpp"
#include "daemon/service/sweep_engine.hpp"

namespace echoline::service {
namespace {

using nlohmann::json;

RequestError error_of(std::string_view line) {
  auto r = parse_request(line);
  EXPECT_TRUE(std::holds_alternative<RequestError>(r)) << line;
  return std::holds_alternative<RequestError>(r) ? std::get<RequestError>(r) : RequestError{};
}

TEST(ParseRequest, AcceptsWellFormedRequestWithArgs) {
  auto r = parse_request(R"({"v":1,"id":"a7","call":"test.start","args":{"serial":"WH915A-0001","lot":"L1"}})");
  ASSERT_TRUE(std::holds_alternative<Request>(r));
  const auto& req = std::get<Request>(r);
  EXPECT_EQ(req.id, "a7");
  EXPECT_EQ(req.call, "test.start");
  EXPECT_EQ(req.args["serial"], "WH915A-0001");
}

TEST(ParseRequest, MissingVersionAndArgsDefault) {
  auto r = parse_request(R"({"id":3,"call":"status"})");
  ASSERT_TRUE(std::holds_alternative<Request>(r));
  EXPECT_TRUE(std::get<Request>(r).args.is_object());
}

TEST(ParseRequest, RejectsEachMalformedShapeWithItsCode) {
  EXPECT_EQ(error_of("{").code, "bad_request");
  EXPECT_EQ(error_of("\"status\"").code, "bad_request");
  EXPECT_EQ(error_of(R"({"call":"status"})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"id":1.5,"call":"status"})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"id":1,"call":7})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"id":1,"call":"nope"})").code, "unknown_call");
  EXPECT_EQ(error_of(R"({"v":"1","id":1,"call":"status"})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"v":3,"id":1,"call":"status"})").code, "unsupported_version");
  EXPECT_EQ(error_of(R"({"id":1,"call":"test.start","args":{}})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"id":1,"call":"test.start","args":{"serial":"A","retest":"yes"}})").code, "bad_request");
  EXPECT_EQ(error_of(R"({"id":1,"call":"cal.answer","args":[]})").code, "bad_request");
}

TEST(ParseRequest, ErrorKeepsTheIdWhenItWasReadable) {
  EXPECT_EQ(error_of(R"({"id":"q","call":"nope"})").id, "q");
  EXPECT_TRUE(error_of("not json").id.is_null());
}

TEST(ParseRequest, LineOverTheLimitIsTooLarge) {
  std::string line(kMaxLineBytes, 'x');
  EXPECT_EQ(error_of(line).code, "too_large");
  std::string fits = R"({"id":1,"call":"status","args":{"p":")" + std::string(kMaxLineBytes - 60, 'y') + "\"}}";
  ASSERT_LT(fits.size() + 1, kMaxLineBytes);
  EXPECT_TRUE(std::holds_alternative<Request>(parse_request(fits)));
}

TEST(ParseRequest, ArbitraryBytesNeverThrow) {
  std::string junk;
  for (int i = 0; i < 4096; ++i) {
    junk.push_back(static_cast<char>((i * 131 + 7) & 0xff));
    if (i % 97 == 0) {
      EXPECT_NO_THROW((void)parse_request(junk));
    }
  }
}

TEST(ReplyLines, AreOneJsonObjectPerLineAndSurviveBadUtf8) {
  std::string ok = reply_ok(5, {{"x", 1}});
  ASSERT_EQ(ok.back(), '\n');
  EXPECT_EQ(ok.find('\n'), ok.size() - 1);
  json j = json::parse(ok);
  EXPECT_EQ(j["v"], 1);
  EXPECT_TRUE(j["ok"].get<bool>());
  std::string err = reply_error("i", "busy", "serial \xff busy");
  EXPECT_EQ(json::parse(err)["error"]["code"], "busy");
  json ev = json::parse(event_line(2, "progress", {{"point", 3}, {"of", 9}}));
  EXPECT_EQ(ev["event"], "progress");
  EXPECT_EQ(ev["of"], 9);
}

TEST(Token, ConstantTimeCompareMatchesOnlyEqualStrings) {
  EXPECT_TRUE(constant_time_equal("0123456789abcdef", "0123456789abcdef"));
  EXPECT_FALSE(constant_time_equal("0123456789abcdef", "0123456789abcdeg"));
  EXPECT_FALSE(constant_time_equal("0123456789abcdef", "0123456789abcde"));
  EXPECT_FALSE(constant_time_equal("", "x"));
  EXPECT_TRUE(constant_time_equal("", ""));
}

TEST(AverageDbm, AveragesInLinearPower) {
  // 0 dBm = 1 mW and -10 dBm = 0.1 mW: mean 0.55 mW = 10·log10(0.55) = -2.596 dBm
  // (definition of the dBm, common practice, no source).
  EXPECT_NEAR(average_dbm({0.0, -10.0}), 10.0 * std::log10(0.55), 1e-12);
  EXPECT_NEAR(average_dbm({-40.0, -40.0, -40.0}), -40.0, 1e-12);
}

TEST(Clock, IsoUtcRoundTripsToTheMillisecond) {
  // 2026-12-01T22:15:00Z is 1796163300 s after the Unix epoch (computed with timegm).
  auto t = parse_utc_iso8601("2026-12-01T22:15:00.123Z");
  ASSERT_TRUE(t.has_value());
  EXPECT_NEAR(*t, 1796163300.123, 1e-6);
  EXPECT_EQ(utc_iso8601(*t), "2026-12-01T22:15:00.123Z");
  EXPECT_EQ(compact_utc(*t), "20261201T221500Z");
  EXPECT_FALSE(parse_utc_iso8601("2026-12-01 22:15:00Z").has_value());
  EXPECT_FALSE(parse_utc_iso8601("2026-12-01T22:15:00").has_value());
}

}  // namespace
}  // namespace echoline::service
