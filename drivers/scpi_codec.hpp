// SCPI / IEEE 488.2 codec: parses reply text (numbers, lists, *IDN?, SYST:ERR?, # blocks,
// REAL binary) and formats numbers. Pure functions: no I/O, no locale, no shared state
// (safe from any thread). Every malformed input is ErrorKind::protocol with the text quoted.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/result.hpp"

namespace echoline::scpi {

// FORMat:BORDer NORMal = big-endian, SWAPped = little-endian.
enum class ByteOrder { normal, swapped };

// The four *IDN? fields (IEEE 488.2 §10.14).
struct Identity { std::string manufacturer, model, serial, firmware; };

// One SYSTem:ERRor? entry: code 0 means "No error".
struct InstrumentError { int code = 0; std::string message; };

// NR1/NR2/NR3 (optional surrounding whitespace); +-9.9E37 -> +-inf, 9.91E37 -> NaN.
Result<double> parse_number(std::string_view text);
// Comma-separated numbers: "1.0,2,3E-3". An empty reply is an error.
Result<std::vector<double>> parse_number_list(std::string_view text);
// *IDN? reply: exactly four comma-separated fields.
Result<Identity> parse_identity(std::string_view text);
// SYSTem:ERRor? reply: <code>,"<message>" e.g. -113,"Undefined header".
Result<InstrumentError> parse_error_reply(std::string_view text);

// Arbitrary block header. definite: "#<n><len>" with header_bytes = 2 + n, payload_bytes = len.
// Indefinite "#0": definite = false, header_bytes = 2, payload runs to the terminating NL + END.
struct BlockHeader { bool definite = true; std::size_t header_bytes = 0; std::size_t payload_bytes = 0; };
// Parses the header at the start of `start` (which may hold more bytes after it).
// Too few bytes to hold the whole header is also ErrorKind::protocol.
Result<BlockHeader> parse_block_header(std::string_view start);
// REAL,32 / REAL,64 payload -> values. bits is 32 or 64; payload size must be a multiple.
Result<std::vector<double>> decode_real(std::string_view payload, int bits, ByteOrder order);
// "#<n><len><payload>" (definite length).
std::string encode_block(std::string_view payload);
// values -> REAL,32 / REAL,64 payload only (no header). REQUIRES: bits is 32 or 64.
std::string encode_real(const std::vector<double>& values, int bits, ByteOrder order);
// NR3, locale-independent, shortest text that round-trips ("1.5E+09"); inf -> 9.9E+37, NaN -> 9.91E+37.
std::string format_number(double value);

// Text quoted for an error message: "\"...\"", control bytes as \xNN, cut to `limit`
// characters with "..." (and the full length) when longer.
std::string quote(std::string_view text, std::size_t limit = 60);

}  // namespace echoline::scpi
