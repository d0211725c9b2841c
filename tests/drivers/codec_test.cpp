// SCPI codec against IEEE 488.2 / SCPI-1999 examples and IEEE 754 bit patterns.
#include "drivers/scpi_codec.hpp"

#include <cmath>
#include <limits>
#include <string>

#include <gtest/gtest.h>

namespace echoline::scpi {
namespace {

using namespace std::string_literals;

TEST(CodecNumber, ParsesNr1Nr2Nr3) {
  // IEEE 488.2 §8.7.2-8.7.4: NR1 integer, NR2 explicit decimal point, NR3 with exponent.
  EXPECT_EQ(*parse_number("42"), 42.0);
  EXPECT_EQ(*parse_number("-17"), -17.0);
  EXPECT_EQ(*parse_number("+3"), 3.0);
  EXPECT_EQ(*parse_number("12.5"), 12.5);
  EXPECT_EQ(*parse_number(".5"), 0.5);
  EXPECT_EQ(*parse_number("1.5E+09"), 1.5e9);
  EXPECT_EQ(*parse_number("-2.25e-3"), -2.25e-3);
  EXPECT_EQ(*parse_number("  9.15E8\r\n"), 9.15e8);
}

TEST(CodecNumber, ScpiInfinityAndNotANumber) {
  // SCPI-1999 Vol 1 ch. 7 (values from memory): INF = 9.9E37, NINF = -9.9E37, NAN = 9.91E37.
  EXPECT_EQ(*parse_number("9.9E37"), std::numeric_limits<double>::infinity());
  EXPECT_EQ(*parse_number("+9.90000E+37"), std::numeric_limits<double>::infinity());
  EXPECT_EQ(*parse_number("-9.9E37"), -std::numeric_limits<double>::infinity());
  EXPECT_TRUE(std::isnan(*parse_number("9.91E37")));
  EXPECT_EQ(*parse_number("9.8E37"), 9.8e37);   // a neighbour is an ordinary number
}

TEST(CodecNumber, MalformedNumbersAreProtocolErrorsQuotingTheText) {
  for (const char* bad : {"", "abc", "1.2.3", "1E", "--1", "inf", "nan", "0x10", "1,5", "1.5 V", "E5", "."}) {
    auto r = parse_number(bad);
    ASSERT_FALSE(r.ok()) << bad;
    EXPECT_EQ(r.error().kind, ErrorKind::protocol);
    EXPECT_NE(r.error().message.find("\"" + std::string(bad) + "\""), std::string::npos) << r.error().message;
  }
}

TEST(CodecNumber, LongGarbageIsQuotedTruncated) {
  std::string junk(500, 'x');
  auto r = parse_number(junk);
  ASSERT_FALSE(r.ok());
  EXPECT_LT(r.error().message.size(), 150u);
  EXPECT_NE(r.error().message.find("(500 bytes)"), std::string::npos);
}

TEST(CodecNumber, ListOfMixedForms) {
  auto v = parse_number_list("1.0,2,3E-3,-9.9E37");
  ASSERT_TRUE(v.ok());
  ASSERT_EQ(v->size(), 4u);
  EXPECT_EQ((*v)[0], 1.0);
  EXPECT_EQ((*v)[1], 2.0);
  EXPECT_EQ((*v)[2], 3e-3);
  EXPECT_EQ((*v)[3], -std::numeric_limits<double>::infinity());
}

TEST(CodecNumber, ListWithBadElementNamesIt) {
  auto v = parse_number_list("1,2,,4");
  ASSERT_FALSE(v.ok());
  EXPECT_EQ(v.error().kind, ErrorKind::protocol);
  EXPECT_NE(v.error().message.find("element 3"), std::string::npos) << v.error().message;
}

TEST(CodecNumber, FormatIsNr3AndRoundTrips) {
  EXPECT_EQ(format_number(1.5e9), "1.5E+09");
  EXPECT_EQ(format_number(915e6), "9.15E+08");
  EXPECT_EQ(format_number(-10.0), "-1E+01");
  EXPECT_EQ(format_number(std::numeric_limits<double>::infinity()), "9.9E+37");
  EXPECT_EQ(format_number(std::nan("")), "9.91E+37");
  for (double x : {0.1, 2483.5e6, 1.0 / 3.0, -42.125, 6.02214076e23, 5e-324}) {
    EXPECT_EQ(*parse_number(format_number(x)), x) << format_number(x);
  }
}

TEST(CodecIdentity, FourFields) {
  // IEEE 488.2 §10.14 (from memory): manufacturer, model, serial number, firmware level.
  auto id = parse_identity("Echoline,SIM-SRC,SRC0042,1.2.3\n");
  ASSERT_TRUE(id.ok());
  EXPECT_EQ(id->manufacturer, "Echoline");
  EXPECT_EQ(id->model, "SIM-SRC");
  EXPECT_EQ(id->serial, "SRC0042");
  EXPECT_EQ(id->firmware, "1.2.3");
}

TEST(CodecIdentity, ThreeOrFiveFieldsAreRejected) {
  for (const char* bad : {"A,B,C", "A,B,C,D,E"}) {
    auto id = parse_identity(bad);
    ASSERT_FALSE(id.ok()) << bad;
    EXPECT_EQ(id.error().kind, ErrorKind::protocol);
    EXPECT_NE(id.error().message.find(bad), std::string::npos);
  }
}

TEST(CodecErrorReply, ParsesCodeAndMessage) {
  // SCPI-1999 Vol 2 §21.8.4: -113 "Undefined header"; §21.8: 0,"No error".
  auto e = parse_error_reply("-113,\"Undefined header\"");
  ASSERT_TRUE(e.ok());
  EXPECT_EQ(e->code, -113);
  EXPECT_EQ(e->message, "Undefined header");
  auto none = parse_error_reply("+0,\"No error\"\r");
  ASSERT_TRUE(none.ok());
  EXPECT_EQ(none->code, 0);
  // IEEE 488.2 §8.7.8: a doubled quote inside a string is one quote.
  auto q = parse_error_reply("-224,\"Illegal parameter value;\"\"FOO\"\"\"");
  ASSERT_TRUE(q.ok());
  EXPECT_EQ(q->message, "Illegal parameter value;\"FOO\"");
}

TEST(CodecErrorReply, MalformedIsRejected) {
  for (const char* bad : {"No error", "-113", "x,\"y\"", "-113,Undefined header", "-113,\"a\"b\""}) {
    auto e = parse_error_reply(bad);
    EXPECT_FALSE(e.ok()) << bad;
    if (!e.ok()) {
      EXPECT_EQ(e.error().kind, ErrorKind::protocol);
    }
  }
}

TEST(CodecBlock, DefiniteLengthExampleCarriesEightBytes) {
  // IEEE 488.2 §7.7.6.2 / §8.7.9 example: #18ABCDEFGH.
  auto h = parse_block_header("#18ABCDEFGH");
  ASSERT_TRUE(h.ok());
  EXPECT_TRUE(h->definite);
  EXPECT_EQ(h->header_bytes, 3u);
  EXPECT_EQ(h->payload_bytes, 8u);
}

TEST(CodecBlock, ThreeLengthDigits) {
  std::string block = "#3100" + std::string(100, 'z');
  auto h = parse_block_header(block);
  ASSERT_TRUE(h.ok());
  EXPECT_EQ(h->header_bytes, 5u);
  EXPECT_EQ(h->payload_bytes, 100u);
  EXPECT_EQ(encode_block(std::string(100, 'z')), block);
}

TEST(CodecBlock, IndefiniteLength) {
  // IEEE 488.2 §7.7.6.2: #0 ... terminated by NL^END.
  auto h = parse_block_header("#0ABC\n");
  ASSERT_TRUE(h.ok());
  EXPECT_FALSE(h->definite);
  EXPECT_EQ(h->header_bytes, 2u);
}

TEST(CodecBlock, NonDigitAfterHashIsRejected) {
  auto h = parse_block_header("#A8ABCDEFGH");
  ASSERT_FALSE(h.ok());
  EXPECT_EQ(h.error().kind, ErrorKind::protocol);
  EXPECT_NE(h.error().message.find("#A8ABCDEFGH"), std::string::npos);
}

TEST(CodecBlock, EndBeforeLengthDigitsIsRejected) {
  // '#4' announces four length digits; only two arrive before the end.
  auto h = parse_block_header("#412");
  ASSERT_FALSE(h.ok());
  EXPECT_EQ(h.error().kind, ErrorKind::protocol);
  EXPECT_FALSE(parse_block_header("#").ok());
  EXPECT_FALSE(parse_block_header("18ABCDEFGH").ok());
  EXPECT_FALSE(parse_block_header("#2A1").ok());
}

TEST(CodecReal, Real32OfOnePointFiveBigEndian) {
  // IEEE 754 binary32: 1.5 = 0x3FC00000. FORMat:BORDer NORMal sends the most significant byte first (SCPI-1999 Vol 2, FORMat subsystem; from memory).
  EXPECT_EQ(encode_real({1.5}, 32, ByteOrder::normal), "\x3F\xC0\x00\x00"s);
  EXPECT_EQ(encode_real({1.5}, 32, ByteOrder::swapped), "\x00\x00\xC0\x3F"s);
  auto v = decode_real("\x3F\xC0\x00\x00"s, 32, ByteOrder::normal);
  ASSERT_TRUE(v.ok());
  ASSERT_EQ(v->size(), 1u);
  EXPECT_EQ((*v)[0], 1.5);
}

TEST(CodecReal, Real64BothOrders) {
  // IEEE 754 binary64: -2.0 = 0xC000000000000000.
  EXPECT_EQ(encode_real({-2.0}, 64, ByteOrder::normal), "\xC0\x00\x00\x00\x00\x00\x00\x00"s);
  std::vector<double> values{-45.25, 0.0, 1e-12, -120.5};
  for (auto order : {ByteOrder::normal, ByteOrder::swapped}) {
    auto back = decode_real(encode_real(values, 64, order), 64, order);
    ASSERT_TRUE(back.ok());
    EXPECT_EQ(*back, values);
  }
}

TEST(CodecReal, RaggedPayloadIsRejected) {
  auto v = decode_real("\x3F\xC0\x00"s, 32, ByteOrder::normal);
  ASSERT_FALSE(v.ok());
  EXPECT_EQ(v.error().kind, ErrorKind::protocol);
  EXPECT_FALSE(decode_real("", 16, ByteOrder::normal).ok());
}

}  // namespace
}  // namespace echoline::scpi
