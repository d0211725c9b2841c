// Fuzz target for the SCPI reply codec (drivers/scpi_codec.hpp): every parser on the same bytes,
// then the block path (header -> payload -> REAL,32/64 decode) with round-trip invariants.
// Hostile replies must come back as ErrorKind::protocol values, never crash or throw.
// Single-threaded; no state between inputs.
#include <cmath>
#include <cstdint>
#include <string>

#include "drivers/scpi_codec.hpp"
#include "tests/fuzz/fuzz_check.hpp"

namespace scpi = echoline::scpi;
using echoline::ErrorKind;

namespace {

template <typename R>
void check_error_shape(const R& r, const char* parser) {
  if (r.ok()) return;
  // The codec header: every malformed input is ErrorKind::protocol with the text quoted.
  FUZZ_CHECK(r.error().kind == ErrorKind::protocol, std::string(parser) + ": error kind is not protocol");
  FUZZ_CHECK(!r.error().message.empty(), std::string(parser) + ": empty error message");
}

// format_number must round-trip through parse_number (codec header: "shortest text that round-trips").
void check_number_round_trip(double v) {
  if (std::isnan(v)) return;
  if (std::fabs(v) >= 9.9e37) return;   // SCPI-1999 Vol 1 §7.2.1: 9.9E37 is the infinity code
  const std::string text = scpi::format_number(v);
  auto back = scpi::parse_number(text);
  FUZZ_CHECK(back.ok(), "format_number output does not parse: " + text);
  FUZZ_CHECK(*back == v, "format_number does not round-trip: " + text);
}

void fuzz_block(std::string_view data) {
  auto header = scpi::parse_block_header(data);
  check_error_shape(header, "parse_block_header");
  if (!header.ok()) return;
  const auto& h = *header;
  FUZZ_CHECK(h.header_bytes <= data.size(), "header_bytes beyond the input");
  FUZZ_CHECK(h.header_bytes >= 2, "header shorter than '#<n>'");
  if (h.definite) {
    // IEEE 488.2 §8.7.9: "#<n><n digits>", n in 1..9.
    FUZZ_CHECK(h.header_bytes <= 11, "definite header longer than #9 + 9 digits");
  }
  std::string_view rest = data.substr(h.header_bytes);
  std::string_view payload = h.definite ? rest.substr(0, std::min(rest.size(), h.payload_bytes)) : rest;

  for (int bits : {32, 64}) {
    for (auto order : {scpi::ByteOrder::normal, scpi::ByteOrder::swapped}) {
      auto values = scpi::decode_real(payload, bits, order);
      check_error_shape(values, "decode_real");
      if (!values.ok()) {
        FUZZ_CHECK(payload.size() % static_cast<std::size_t>(bits / 8) != 0, "decode_real refused a whole payload");
        continue;
      }
      FUZZ_CHECK(values->size() * static_cast<std::size_t>(bits / 8) == payload.size(), "decode_real value count");
      bool any_nan = false;
      for (double v : *values) any_nan = any_nan || std::isnan(v);
      if (!any_nan) {   // NaN payload bits need not survive; everything else must
        FUZZ_CHECK(scpi::encode_real(*values, bits, order) == payload, "encode_real(decode_real(x)) != x");
      }
      for (std::size_t i = 0; i < values->size() && i < 8; ++i) check_number_round_trip((*values)[i]);
    }
  }
  // encode_block / parse_block_header agree on the framing.
  const std::string framed = scpi::encode_block(payload);
  auto again = scpi::parse_block_header(framed);
  FUZZ_CHECK(again.ok() && again->definite, "encode_block output does not parse");
  FUZZ_CHECK(again->payload_bytes == payload.size(), "encode_block length");
  FUZZ_CHECK(again->header_bytes + payload.size() == framed.size(), "encode_block framing");
}

}  // namespace

extern "C" int LLVMFuzzerTestOneInput(const std::uint8_t* data, std::size_t size) {
  const std::string_view text = echoline::fuzz::as_text(data, size);

  auto number = scpi::parse_number(text);
  check_error_shape(number, "parse_number");
  if (number.ok()) check_number_round_trip(*number);

  auto list = scpi::parse_number_list(text);
  check_error_shape(list, "parse_number_list");
  if (list.ok()) FUZZ_CHECK(!list->empty(), "parse_number_list returned an empty list");

  auto id = scpi::parse_identity(text);
  check_error_shape(id, "parse_identity");

  auto err = scpi::parse_error_reply(text);
  check_error_shape(err, "parse_error_reply");

  (void)scpi::quote(text);
  FUZZ_CHECK(scpi::quote(text, 8).size() < 8 * 4 + 64, "quote() ignores its limit");

  fuzz_block(text);
  return 0;
}
