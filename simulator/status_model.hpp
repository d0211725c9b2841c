// IEEE 488.2 §11 status model of one simulated instrument: the SCPI error/event queue,
// the standard event status register (ESR/ESE), the status byte (STB/SRE), pending
// operations for *OPC / *OPC? / *WAI on the sim clock, and the common commands that use them.
// Single-threaded (the owning instrument's thread). Pure: time comes in as arguments.
#pragma once

#include <algorithm>
#include <cstddef>
#include <deque>
#include <functional>
#include <string>
#include <string_view>

namespace echoline::sim {

class CommandTree;

// ESR bits (IEEE 488.2 §11.5.1, from memory).
inline constexpr int kEsrOpc = 1;     // operation complete
inline constexpr int kEsrRqc = 2;     // request control
inline constexpr int kEsrQye = 4;     // query error
inline constexpr int kEsrDde = 8;     // device-dependent error
inline constexpr int kEsrExe = 16;    // execution error
inline constexpr int kEsrCme = 32;    // command error
inline constexpr int kEsrUrq = 64;    // user request
inline constexpr int kEsrPon = 128;   // power on
// STB bits (IEEE 488.2 §11.2; bit 2 = error queue not empty is SCPI-99).
inline constexpr int kStbErrorQueue = 4;
inline constexpr int kStbMav = 16;
inline constexpr int kStbEsb = 32;
inline constexpr int kStbMss = 64;

// Standard SCPI-99 Vol 2 §21.8 message for a code ("Undefined header"); "" when unknown.
std::string_view standard_error_message(int code);

class StatusModel {
 public:
  // SCPI-99 Vol 2 §21.8 requires room for at least 2 entries; 16 is a common size.
  static constexpr std::size_t kDefaultQueueCapacity = 16;

  // Power-on state: ESR has PON set, queue empty, enables 0.
  explicit StatusModel(std::size_t queue_capacity = kDefaultQueueCapacity);

  // Queues "<code>,\"<standard message>[;<detail>]\"" and sets the ESR bit of the code's class
  // (-1xx CME, -2xx EXE, -3xx and positive DDE, -4xx QYE). When the queue is full the last
  // entry is replaced by -350 "Queue overflow" (SCPI-99 Vol 2 §21.8).
  void push_error(int code, std::string_view detail = {});
  // The same with a message of the caller's own (device-specific codes).
  void push_error_message(int code, std::string message);

  // SYSTem:ERRor[:NEXT]?: the oldest entry, or 0,"No error" when empty.
  std::string pop_error();
  std::size_t error_count() const { return queue_.size(); }

  int esr() const { return esr_; }
  int read_esr();                            // *ESR?: value, then cleared
  void set_esr_bits(int bits) { esr_ |= bits; }
  int ese() const { return ese_; }
  void set_ese(int value) { ese_ = value & 0xFF; }
  int sre() const { return sre_; }
  void set_sre(int value) { sre_ = value & 0xBF; }   // bit 6 ignored (IEEE 488.2 §10.34)
  // *STB?: MAV when `message_available`, ESB from ESR&ESE, error-queue bit, MSS summary.
  int stb(bool message_available) const;

  // *CLS: clears ESR, the error queue and a pending *OPC; keeps ESE/SRE (IEEE 488.2 §10.3).
  void clear();

  // Pending operations on the sim clock (a receiver sweep). begin: busy until `until_s`.
  void begin_operation(double until_s);
  void abort_operations(double now_s);       // ABORt / *RST: nothing pending any more
  double remaining_s(double now_s) const;    // time until all pending operations end (>= 0)
  // *OPC: ESR bit 0 gets set once pending operations end (at advance()).
  void arm_opc(double now_s);
  // *WAI: replies to later queries wait for what is pending now.
  void wait(double now_s) { wait_until_s_ = std::max(wait_until_s_, pending_until_s_); (void)now_s; }
  double wait_remaining_s(double now_s) const { return wait_until_s_ > now_s ? wait_until_s_ - now_s : 0.0; }
  // Moves the status to `now_s` (call before each message): completes an armed *OPC.
  void advance(double now_s);

 private:
  std::size_t capacity_;
  std::deque<std::string> queue_;
  bool last_is_overflow_ = false;
  int esr_ = kEsrPon;
  int ese_ = 0;
  int sre_ = 0;
  double pending_until_s_ = 0;
  double wait_until_s_ = 0;
  bool opc_armed_ = false;
};

// Hooks the common commands need from the instrument.
struct CommonHooks {
  std::function<std::string()> identity;   // *IDN? text
  std::function<void()> reset;             // *RST: settings to their reset values
};

// Registers *CLS *ESE[?] *ESR? *IDN? *OPC[?] *RST *SRE[?] *STB? *TST? *WAI, SYSTem:ERRor[:NEXT]?,
// SYSTem:ERRor:COUNt? and SYSTem:VERSion? on `tree`. `status` must outlive the tree.
void add_common_commands(CommandTree& tree, StatusModel& status, CommonHooks hooks);

}  // namespace echoline::sim
