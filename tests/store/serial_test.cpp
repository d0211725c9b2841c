// Serial validation: hostile serials are refused with a message naming what is wrong and where.
#include "daemon/store/serial.hpp"

#include <gtest/gtest.h>

#include <string>

namespace echoline::store {
namespace {

std::string rejection(std::string_view serial, std::string_view pattern = kDefaultSerialPattern) {
  auto s = validate_serial(serial, pattern);
  EXPECT_FALSE(s.ok()) << "accepted: " << serial;
  return s.ok() ? std::string() : s.error().message;
}

TEST(Serial, OrdinarySerialsAreAccepted) {
  EXPECT_TRUE(validate_serial("WH915A-0001").ok());
  EXPECT_TRUE(validate_serial("a.b_c-9").ok());
  EXPECT_TRUE(validate_serial(std::string(64, 'X')).ok());
}

TEST(Serial, SlashIsNamedWithItsPosition) {
  EXPECT_EQ(rejection("ab/cd"),
            "serial 'ab/cd' rejected: character '/' at position 3 is not allowed (allowed: A–Z a–z 0–9 . _ -)");
}

TEST(Serial, HostileSerialsAreRejected) {
  EXPECT_NE(rejection("../x").find("'/' at position 3"), std::string::npos);
  EXPECT_NE(rejection("a\\b").find("'\\' at position 2"), std::string::npos);
  EXPECT_NE(rejection("ab\"c").find("'\"'"), std::string::npos);
  EXPECT_NE(rejection("'; DROP TABLE runs;--").find("character ''' at position 1"), std::string::npos);
  EXPECT_NE(rejection("abc\n").find("control character 0x0A at position 4"), std::string::npos);
  EXPECT_NE(rejection(std::string("a\0b", 3)).find("control character 0x00 at position 2"), std::string::npos);
  EXPECT_NE(rejection("ab\x7f").find("0x7F"), std::string::npos);
  EXPECT_NE(rejection("").find("empty"), std::string::npos);
  EXPECT_NE(rejection(".").find("'.' and '..'"), std::string::npos);
  EXPECT_NE(rejection("..").find("'.' and '..'"), std::string::npos);
  EXPECT_NE(rejection(std::string(10000, 'A')).find("10000 bytes long"), std::string::npos);
  EXPECT_NE(rejection(std::string(65, 'A')).find("65 characters long (at most 64"), std::string::npos);
  EXPECT_NE(rejection("ab\xff\xfe").find("byte 0xFF at position 3 is not valid UTF-8"), std::string::npos);
  EXPECT_NE(rejection("ab\xc0\xaf").find("not valid UTF-8"), std::string::npos);  // overlong '/', RFC 3629 §3
  EXPECT_NE(rejection("a b").find("space at position 2"), std::string::npos);
  // Valid UTF-8 outside the default alphabet is named as a character.
  EXPECT_NE(rejection("Ωmega").find("character 'Ω' at position 1"), std::string::npos);
}

TEST(Serial, MessageShowsControlBytesEscaped) {
  const auto m = rejection("x\x1b[2J");
  EXPECT_EQ(m.find('\x1b'), std::string::npos);
  EXPECT_NE(m.find("\\x1B"), std::string::npos);
}

TEST(Serial, StationPatternApplies) {
  EXPECT_TRUE(validate_serial("WH915A-0001", "^WH915[A-Z]-[0-9]{4}$").ok());
  EXPECT_NE(rejection("XX-1", "^WH915[A-Z]-[0-9]{4}$").find("does not match the station's serial pattern"),
            std::string::npos);
  // Fixed rules hold even when a pattern would allow more.
  EXPECT_NE(rejection("a/b", ".*").find("'/'"), std::string::npos);
  auto bad = validate_serial("x", "([");
  ASSERT_FALSE(bad.ok());
  EXPECT_EQ(bad.error().kind, ErrorKind::config);
}

TEST(Serial, SafeFileStemIsAPlainNameAndKeepsSerialsApart) {
  EXPECT_EQ(safe_file_stem("WH915A-0001"), "WH915A-0001");
  const auto a = safe_file_stem("../x"), b = safe_file_stem("..\\x");
  for (const auto& s : {a, b, safe_file_stem(""), safe_file_stem(".."), safe_file_stem(std::string(300, 'z'))}) {
    EXPECT_FALSE(s.empty());
    EXPECT_NE(s[0], '.');
    EXPECT_LE(s.size(), 64u);
    EXPECT_EQ(s.find_first_not_of("ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789._-"), std::string::npos) << s;
  }
  EXPECT_NE(a, b);
}

}  // namespace
}  // namespace echoline::store
