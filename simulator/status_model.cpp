// IEEE 488.2 status model and common commands: see status_model.hpp.
#include "simulator/status_model.hpp"

#include <string>
#include <utility>

#include "simulator/command_tree.hpp"

namespace echoline::sim {

std::string_view standard_error_message(int code) {
  // SCPI-1999 Vol 2 §21.8 (SYSTem:ERRor; texts as the standard gives them).
  switch (code) {
    case 0: return "No error";
    case -100: return "Command error";
    case -101: return "Invalid character";
    case -102: return "Syntax error";
    case -103: return "Invalid separator";
    case -104: return "Data type error";
    case -108: return "Parameter not allowed";
    case -109: return "Missing parameter";
    case -110: return "Command header error";
    case -111: return "Header separator error";
    case -112: return "Program mnemonic too long";
    case -113: return "Undefined header";
    case -114: return "Header suffix out of range";
    case -120: return "Numeric data error";
    case -131: return "Invalid suffix";
    case -138: return "Suffix not allowed";
    case -141: return "Invalid character data";
    case -144: return "Character data too long";
    case -151: return "Invalid string data";
    case -161: return "Invalid block data";
    case -170: return "Expression error";
    case -200: return "Execution error";
    case -213: return "Init ignored";
    case -220: return "Parameter error";
    case -221: return "Settings conflict";
    case -222: return "Data out of range";
    case -223: return "Too much data";
    case -224: return "Illegal parameter value";
    case -230: return "Data corrupt or stale";
    case -240: return "Hardware error";
    case -300: return "Device-specific error";
    case -310: return "System error";
    case -330: return "Self-test failed";
    case -350: return "Queue overflow";
    case -400: return "Query error";
    case -410: return "Query INTERRUPTED";
    case -420: return "Query UNTERMINATED";
    case -430: return "Query DEADLOCKED";
    case -440: return "Query UNTERMINATED after indefinite response";
    default: return "";
  }
}

namespace {

int esr_bit_for(int code) {
  if (code <= -100 && code > -200) return kEsrCme;
  if (code <= -200 && code > -300) return kEsrExe;
  if (code <= -400 && code > -500) return kEsrQye;
  return kEsrDde;  // -3xx and device-specific positive codes
}

std::string quote_free(std::string s) {
  for (char& c : s) {
    if (c == '"') c = '\'';
    if (c == '\n' || c == '\r') c = ' ';
  }
  return s;
}

}  // namespace

StatusModel::StatusModel(std::size_t queue_capacity) : capacity_(queue_capacity < 2 ? 2 : queue_capacity) {}

void StatusModel::push_error(int code, std::string_view detail) {
  std::string message(standard_error_message(code));
  if (message.empty()) message = code < 0 ? "Error" : "Device-specific error";
  if (!detail.empty()) message += ";" + std::string(detail);
  push_error_message(code, std::move(message));
}

void StatusModel::push_error_message(int code, std::string message) {
  esr_ |= esr_bit_for(code);
  if (queue_.size() < capacity_) {
    queue_.push_back(std::to_string(code) + ",\"" + quote_free(std::move(message)) + "\"");
    return;
  }
  // Full: the most recent entry becomes -350 (SCPI-99 Vol 2 §21.8); further errors are lost.
  esr_ |= kEsrDde;
  if (!last_is_overflow_) {
    queue_.back() = "-350,\"Queue overflow\"";
    last_is_overflow_ = true;
  }
}

std::string StatusModel::pop_error() {
  if (queue_.empty()) return "0,\"No error\"";
  std::string e = std::move(queue_.front());
  queue_.pop_front();
  if (queue_.empty()) last_is_overflow_ = false;
  return e;
}

int StatusModel::read_esr() {
  const int v = esr_;
  esr_ = 0;
  return v;
}

int StatusModel::stb(bool message_available) const {
  int v = 0;
  if (!queue_.empty()) v |= kStbErrorQueue;
  if (message_available) v |= kStbMav;
  if (esr_ & ese_) v |= kStbEsb;
  if (v & sre_) v |= kStbMss;
  return v;
}

void StatusModel::clear() {
  esr_ = 0;
  queue_.clear();
  last_is_overflow_ = false;
  opc_armed_ = false;
}

void StatusModel::begin_operation(double until_s) { pending_until_s_ = std::max(pending_until_s_, until_s); }

void StatusModel::abort_operations(double now_s) {
  pending_until_s_ = std::min(pending_until_s_, now_s);
  wait_until_s_ = std::min(wait_until_s_, now_s);
  advance(now_s);
}

double StatusModel::remaining_s(double now_s) const { return pending_until_s_ > now_s ? pending_until_s_ - now_s : 0.0; }

void StatusModel::arm_opc(double now_s) {
  opc_armed_ = true;
  advance(now_s);
}

void StatusModel::advance(double now_s) {
  if (opc_armed_ && now_s >= pending_until_s_) {
    esr_ |= kEsrOpc;
    opc_armed_ = false;
  }
}

void add_common_commands(CommandTree& tree, StatusModel& status, CommonHooks hooks) {
  StatusModel* s = &status;
  auto no_params = [](const Call& c) { return check_param_count(c, 0, 0); };
  auto int_param = [](const Call& c) -> std::variant<int, ScpiError> {
    if (auto e = check_param_count(c, 1, 1)) return *e;
    auto v = to_number(c.params()[0], Unit::none, {0, 255, 0});
    if (auto* e = std::get_if<ScpiError>(&v)) return *e;
    const double d = std::get<double>(v);
    if (d < -0.5 || d >= 255.5) return ScpiError{-222, c.unit.header_text + " " + c.params()[0].text + " not in 0..255"};
    return static_cast<int>(d + 0.5);
  };
  // IEEE 488.2 §10.3 *CLS
  tree.add("*CLS", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    s->clear();
    return Outcome::done();
  });
  // §10.10 / §10.11 *ESE, *ESE?
  tree.add("*ESE[?]", [s, no_params, int_param](const Call& c) {
    if (c.query) {
      if (auto e = no_params(c)) return Outcome::fail(*e);
      return Outcome::text(std::to_string(s->ese()));
    }
    auto v = int_param(c);
    if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
    s->set_ese(std::get<int>(v));
    return Outcome::done();
  });
  // §10.12 *ESR? reads and clears
  tree.add("*ESR?", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text(std::to_string(s->read_esr()));
  });
  // §10.14 *IDN?
  tree.add("*IDN?", [hooks, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text(hooks.identity());
  });
  // §10.18 *OPC sets ESR bit 0 when pending operations end; §10.19 *OPC? answers "1" then
  // (and does not set bit 0).
  tree.add("*OPC[?]", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    if (c.query) return Outcome::text("1", s->remaining_s(c.now_s));
    s->arm_opc(c.now_s);
    return Outcome::done();
  });
  // §10.32 *RST: settings only; status registers and queue stay.
  tree.add("*RST", [s, hooks, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    s->abort_operations(c.now_s);
    hooks.reset();
    return Outcome::done();
  });
  // §10.34 / §10.35 *SRE, *SRE?
  tree.add("*SRE[?]", [s, no_params, int_param](const Call& c) {
    if (c.query) {
      if (auto e = no_params(c)) return Outcome::fail(*e);
      return Outcome::text(std::to_string(s->sre()));
    }
    auto v = int_param(c);
    if (auto* e = std::get_if<ScpiError>(&v)) return Outcome::fail(*e);
    s->set_sre(std::get<int>(v));
    return Outcome::done();
  });
  // §10.36 *STB? (MAV is not set: this reply is the only output being formed)
  tree.add("*STB?", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text(std::to_string(s->stb(false)));
  });
  // §10.38 *TST?: 0 = passed
  tree.add("*TST?", [no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text("0");
  });
  // §10.39 *WAI
  tree.add("*WAI", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    s->wait(c.now_s);
    return Outcome::done();
  });
  // SCPI-99 Vol 2 §21.8 SYSTem:ERRor[:NEXT]?
  tree.add("SYSTem:ERRor[:NEXT]?", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text(s->pop_error());
  });
  tree.add("SYSTem:ERRor:COUNt?", [s, no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text(std::to_string(s->error_count()));
  });
  // SCPI-99 Vol 2 §21.21 SYSTem:VERSion? (section number from memory)
  tree.add("SYSTem:VERSion?", [no_params](const Call& c) {
    if (auto e = no_params(c)) return Outcome::fail(*e);
    return Outcome::text("1999.0");
  });
}

}  // namespace echoline::sim
