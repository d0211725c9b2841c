// SHA-256 against the FIPS 180-2 appendix examples (daemon/core/sha256.hpp).
#include "daemon/core/sha256.hpp"

#include <string>

#include <gtest/gtest.h>

namespace echoline::core {
namespace {

// FIPS 180-2 Appendix B.1, one-block message "abc".
TEST(Sha256, AbcVector) {
  EXPECT_EQ(sha256_hex("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
}

// FIPS 180-2 Appendix B.2, two-block message.
TEST(Sha256, TwoBlockVector) {
  EXPECT_EQ(sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
}

// FIPS 180-2 Appendix B.3, one million 'a'.
TEST(Sha256, MillionAVector) {
  EXPECT_EQ(sha256_hex(std::string(1000000, 'a')),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

// Empty message (FIPS 180-2 padding of a zero-length message; widely published value, from memory).
TEST(Sha256, EmptyMessage) {
  EXPECT_EQ(sha256_hex(""), "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

// 55, 56 and 64 bytes straddle the one-/two-block padding boundary (FIPS 180-2 §5.1.1).
// Expected digests computed with GNU coreutils sha256sum on the same bytes.
TEST(Sha256, PaddingBoundaryLengths) {
  EXPECT_EQ(sha256_hex(std::string(55, 'x')), "d5e285683cd4efc02d021a5c62014694958901005d6f71e89e0989fac77e4072");
  EXPECT_EQ(sha256_hex(std::string(56, 'x')), "04c26261370ee7541549d16dee320c723e3fd14671e66a099afe0a377c16888e");
  EXPECT_EQ(sha256_hex(std::string(64, 'x')), "7ce100971f64e7001e8fe5a51973ecdfe1ced42befe7ee8d5fd6219506b5393c");
}

}  // namespace
}  // namespace echoline::core
