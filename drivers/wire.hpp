// Wire constants of the SCPI / IEEE 488.2 layer: special numbers, common commands, limits,
// address schemes. Constants only (no code, no state); include from anywhere.
#pragma once

#include <cstddef>
#include <string_view>

namespace echoline::wire {

// SCPI-1999 Vol 1 ch. 7 (from memory): 9.9E37 stands for +infinity (-9.9E37 for -infinity),
// 9.91E37 for "not a number".
inline constexpr double kScpiInfinity = 9.9e37;
inline constexpr double kScpiNotANumber = 9.91e37;

// IEEE 488.2 common commands and the SCPI error queue (SCPI-1999 Vol 2 §21.8).
inline constexpr std::string_view kIdentify = "*IDN?";
inline constexpr std::string_view kOperationCompleteQuery = "*OPC?";
inline constexpr std::string_view kClearStatus = "*CLS";
inline constexpr std::string_view kReset = "*RST";
inline constexpr std::string_view kNextError = "SYST:ERR?";

// drain_errors() reads the error queue at most this often (common practice, no source:
// instruments keep 10-32 entries and add "-350,Queue overflow" when full).
inline constexpr int kMaxErrorReads = 32;

// IEEE 488.2 §7.7.6: '#', one digit n (1-9) giving the count of length digits; "#0" is indefinite.
inline constexpr char kBlockStart = '#';
inline constexpr std::size_t kMaxBlockLengthDigits = 9;

// Error messages quote offending text up to this many characters.
inline constexpr std::size_t kQuoteLimit = 60;
// A read timeout quotes the start of a partial reply, this many characters (common practice, no
// source: enough to recognise a reply or a prompt, short enough for one log line).
inline constexpr std::size_t kPartialReplyQuoteLimit = 24;

// Transport address schemes.
inline constexpr std::string_view kTcpScheme = "tcp://";
inline constexpr std::string_view kSerialScheme = "serial:";

// Linux char-device majors of pseudo-terminal slaves (UNIX98_PTY_SLAVE_MAJOR 136 .. +7,
// Documentation/admin-guide/devices.txt).
inline constexpr unsigned kPtySlaveMajorFirst = 136;
inline constexpr unsigned kPtySlaveMajorLast = 143;

}  // namespace echoline::wire
