// SCPI / IEEE 488.2 reply parsing and number formatting. Pure; see scpi_codec.hpp.
#include "drivers/scpi_codec.hpp"

#include <bit>
#include <charconv>
#include <cmath>
#include <cstdint>
#include <cstring>
#include <limits>

#include <fmt/format.h>

#include "drivers/wire.hpp"

namespace echoline::scpi {
namespace {

Error protocol(std::string what, std::string_view text) {
  return make_error(ErrorKind::protocol, fmt::format("{}: {}", what, quote(text)));
}

bool is_space(char c) { return c == ' ' || c == '\t' || c == '\r' || c == '\n'; }
bool is_digit(char c) { return c >= '0' && c <= '9'; }

std::string_view trim(std::string_view s) {
  while (!s.empty() && is_space(s.front())) s.remove_prefix(1);
  while (!s.empty() && is_space(s.back())) s.remove_suffix(1);
  return s;
}

// Checks the IEEE 488.2 §7.7.2 decimal numeric grammar (NR1/NR2/NR3 and their flexible
// combination): [+-] digits [. digits] [E [+-] digits], at least one mantissa digit.
bool is_decimal_numeric(std::string_view s) {
  std::size_t i = 0;
  if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
  std::size_t mantissa_digits = 0;
  while (i < s.size() && is_digit(s[i])) { ++i; ++mantissa_digits; }
  if (i < s.size() && s[i] == '.') {
    ++i;
    while (i < s.size() && is_digit(s[i])) { ++i; ++mantissa_digits; }
  }
  if (mantissa_digits == 0) return false;
  if (i < s.size() && (s[i] == 'e' || s[i] == 'E')) {
    ++i;
    if (i < s.size() && (s[i] == '+' || s[i] == '-')) ++i;
    std::size_t exponent_digits = 0;
    while (i < s.size() && is_digit(s[i])) { ++i; ++exponent_digits; }
    if (exponent_digits == 0) return false;
  }
  return i == s.size();
}

std::vector<std::string_view> split_commas(std::string_view s) {
  std::vector<std::string_view> parts;
  std::size_t start = 0;
  for (;;) {
    std::size_t comma = s.find(',', start);
    if (comma == std::string_view::npos) {
      parts.push_back(s.substr(start));
      return parts;
    }
    parts.push_back(s.substr(start, comma - start));
    start = comma + 1;
  }
}

template <typename UInt>
UInt maybe_swap(UInt v, bool big_endian_on_wire) {
  bool host_big = std::endian::native == std::endian::big;
  if (host_big == big_endian_on_wire) return v;
  UInt out = 0;
  for (std::size_t i = 0; i < sizeof(UInt); ++i) {
    out = static_cast<UInt>((out << 8) | ((v >> (8 * i)) & 0xFF));
  }
  return out;
}

}  // namespace

std::string quote(std::string_view text, std::size_t limit) {
  std::string out = "\"";
  std::size_t shown = 0;
  for (char c : text) {
    if (shown == limit) break;
    auto u = static_cast<unsigned char>(c);
    if (u < 0x20 || u >= 0x7F) {
      out += fmt::format("\\x{:02X}", u);
    } else if (c == '"' || c == '\\') {
      out += '\\';
      out += c;
    } else {
      out += c;
    }
    ++shown;
  }
  out += '"';
  if (text.size() > limit) out += fmt::format("... ({} bytes)", text.size());
  return out;
}

Result<double> parse_number(std::string_view text) {
  std::string_view s = trim(text);
  if (s.empty()) return protocol("expected a number, got an empty reply", text);
  if (!is_decimal_numeric(s)) return protocol("expected a number (NR1/NR2/NR3)", text);
  std::string_view digits = s;
  if (digits.front() == '+') digits.remove_prefix(1);   // from_chars does not take '+'
  double value = 0;
  auto [end, ec] = std::from_chars(digits.data(), digits.data() + digits.size(), value);
  if (ec == std::errc::result_out_of_range) return protocol("number out of range", text);
  if (ec != std::errc{} || end != digits.data() + digits.size()) return protocol("expected a number", text);
  if (std::fabs(value) == wire::kScpiInfinity) return std::copysign(std::numeric_limits<double>::infinity(), value);
  if (std::fabs(value) == wire::kScpiNotANumber) return std::numeric_limits<double>::quiet_NaN();
  return value;
}

Result<std::vector<double>> parse_number_list(std::string_view text) {
  std::string_view s = trim(text);
  if (s.empty()) return protocol("expected a list of numbers, got an empty reply", text);
  std::vector<double> values;
  auto parts = split_commas(s);
  values.reserve(parts.size());
  for (std::size_t i = 0; i < parts.size(); ++i) {
    auto v = parse_number(parts[i]);
    if (!v) {
      return make_error(ErrorKind::protocol,
                        fmt::format("element {} of the number list is not a number: {} in {}", i + 1,
                                    quote(parts[i]), quote(text)));
    }
    values.push_back(*v);
  }
  return values;
}

Result<Identity> parse_identity(std::string_view text) {
  std::string_view s = trim(text);
  auto parts = split_commas(s);
  // IEEE 488.2 §10.14 (from memory): exactly four fields: manufacturer, model, serial, firmware.
  if (parts.size() != 4) {
    return protocol(fmt::format("*IDN? reply has {} fields, expected 4 (manufacturer,model,serial,firmware)",
                                parts.size()),
                    text);
  }
  Identity id{std::string(trim(parts[0])), std::string(trim(parts[1])), std::string(trim(parts[2])),
              std::string(trim(parts[3]))};
  if (id.manufacturer.empty() || id.model.empty()) {
    return protocol("*IDN? reply has an empty manufacturer or model field", text);
  }
  return id;
}

Result<InstrumentError> parse_error_reply(std::string_view text) {
  std::string_view s = trim(text);
  std::size_t comma = s.find(',');
  if (comma == std::string_view::npos) return protocol("error queue reply is not <code>,\"<message>\"", text);
  std::string_view code_text = trim(s.substr(0, comma));
  if (code_text.starts_with('+')) code_text.remove_prefix(1);
  int code = 0;
  auto [end, ec] = std::from_chars(code_text.data(), code_text.data() + code_text.size(), code);
  if (code_text.empty() || ec != std::errc{} || end != code_text.data() + code_text.size()) {
    return protocol("error queue reply does not start with an integer code", text);
  }
  std::string_view rest = trim(s.substr(comma + 1));
  // SCPI-1999 Vol 2 §21.8: the message is a string response (IEEE 488.2 §8.7.8): "..." with "" for ".
  if (rest.size() < 2 || rest.front() != '"' || rest.back() != '"') {
    return protocol("error queue reply message is not a quoted string", text);
  }
  std::string message;
  std::string_view body = rest.substr(1, rest.size() - 2);
  for (std::size_t i = 0; i < body.size(); ++i) {
    if (body[i] == '"') {
      if (i + 1 < body.size() && body[i + 1] == '"') {
        message += '"';
        ++i;
        continue;
      }
      return protocol("error queue reply message has an unpaired quote", text);
    }
    message += body[i];
  }
  return InstrumentError{code, std::move(message)};
}

Result<BlockHeader> parse_block_header(std::string_view start) {
  if (start.empty() || start[0] != wire::kBlockStart) return protocol("block does not start with '#'", start);
  if (start.size() < 2) return protocol("block header cut short after '#'", start);
  char n_char = start[1];
  if (!is_digit(n_char)) return protocol("block header: expected a digit after '#'", start);
  std::size_t n = static_cast<std::size_t>(n_char - '0');
  if (n == 0) return BlockHeader{false, 2, 0};   // IEEE 488.2 §8.7.10 indefinite length
  if (start.size() < 2 + n) {
    return protocol(fmt::format("block header cut short: '#{}' announces {} length digits", n_char, n), start);
  }
  std::size_t len = 0;
  for (std::size_t i = 0; i < n; ++i) {
    char c = start[2 + i];
    if (!is_digit(c)) return protocol("block header: non-digit in the length field", start);
    len = len * 10 + static_cast<std::size_t>(c - '0');
  }
  return BlockHeader{true, 2 + n, len};
}

Result<std::vector<double>> decode_real(std::string_view payload, int bits, ByteOrder order) {
  if (bits != 32 && bits != 64) {
    return make_error(ErrorKind::invalid_argument, fmt::format("REAL format must be 32 or 64 bits, not {}", bits));
  }
  std::size_t width = static_cast<std::size_t>(bits) / 8;
  if (payload.size() % width != 0) {
    return protocol(fmt::format("REAL,{} block of {} bytes is not a whole number of {}-byte values", bits,
                                payload.size(), width),
                    payload);
  }
  bool big = order == ByteOrder::normal;
  std::vector<double> values;
  values.reserve(payload.size() / width);
  for (std::size_t off = 0; off < payload.size(); off += width) {
    if (bits == 32) {
      std::uint32_t raw = 0;
      std::memcpy(&raw, payload.data() + off, 4);
      values.push_back(static_cast<double>(std::bit_cast<float>(maybe_swap(raw, big))));
    } else {
      std::uint64_t raw = 0;
      std::memcpy(&raw, payload.data() + off, 8);
      values.push_back(std::bit_cast<double>(maybe_swap(raw, big)));
    }
  }
  return values;
}

std::string encode_block(std::string_view payload) {
  std::string len = fmt::format("{}", payload.size());
  std::string out = fmt::format("#{}{}", len.size(), len);
  out.append(payload);
  return out;
}

std::string encode_real(const std::vector<double>& values, int bits, ByteOrder order) {
  assert(bits == 32 || bits == 64);
  bool big = order == ByteOrder::normal;
  std::string out;
  out.reserve(values.size() * static_cast<std::size_t>(bits / 8));
  for (double v : values) {
    if (bits == 32) {
      std::uint32_t raw = maybe_swap(std::bit_cast<std::uint32_t>(static_cast<float>(v)), big);
      out.append(reinterpret_cast<const char*>(&raw), 4);
    } else {
      std::uint64_t raw = maybe_swap(std::bit_cast<std::uint64_t>(v), big);
      out.append(reinterpret_cast<const char*>(&raw), 8);
    }
  }
  return out;
}

std::string format_number(double value) {
  if (std::isnan(value)) return "9.91E+37";
  if (std::isinf(value)) return value > 0 ? "9.9E+37" : "-9.9E+37";
  // Shortest digits that round-trip, in scientific form; std::to_chars ignores the locale.
  char buf[64];
  auto [end, ec] = std::to_chars(buf, buf + sizeof buf, value, std::chars_format::scientific);
  assert(ec == std::errc{});
  std::string out(buf, end);
  for (char& c : out) {
    if (c == 'e') c = 'E';
  }
  return out;
}

}  // namespace echoline::scpi
