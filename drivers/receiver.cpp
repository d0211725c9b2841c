// Receiver role driver: range checks, template expansion, trace reading, error policy.
#include "drivers/receiver.hpp"
#include "drivers/role_operation.hpp"

#include <cmath>

#include <fmt/format.h>

namespace echoline::drivers {

Receiver::Receiver(ScpiSession& session, const Profile& profile) : session_(session), profile_(profile) {}

Status Receiver::check_range(std::string_view what, double value, double min, double max,
                           std::string_view unit) const {
  return check_operation_range(session_, profile_, what, value, min, max, unit);
}

Status Receiver::send(std::string_view operation, std::initializer_list<TemplateArg> args, bool check) {
  return send_operation(session_, profile_, operation, args, check);
}

Status Receiver::initialize() {
  if (profile_.reset_on_initialize) {
    if (Status s = session_.reset(); !s.ok()) return s;
  }
  if (Status s = session_.clear(); !s.ok()) return s;
  for (const auto& line : profile_.init)
    if (Status s = session_.write(line); !s.ok()) return s;
  if (Status s = send("set_single", {}, false); !s.ok()) return s;
  // A receiver left armed for an external trigger (a fast capture cut off mid-way) would make
  // every later INIT wait for a pulse that never comes: back to starting at INIT.
  if (profile_.has("trigger_immediate")) {
    if (profile_.has("abort"))
      if (Status s = send("abort", {}, false); !s.ok()) return s;
    if (Status s = send("trigger_immediate", {}, false); !s.ok()) return s;
    if (profile_.has("set_trigger_delay"))
      if (Status s = send("set_trigger_delay", {{"seconds", 0.0}}, false); !s.ok()) return s;
  }
  const bool real = profile_.trace_format == "real32";
  if (profile_.has("set_trace_format"))
    if (Status s = send("set_trace_format", {{"format", std::string(real ? "REAL,32" : "ASC")}}, false); !s.ok()) return s;
  if (real && profile_.has("set_byte_order"))
    if (Status s = send("set_byte_order", {{"byte_order", std::string(profile_.byte_order == "swapped" ? "SWAP" : "NORM")}}, false); !s.ok())
      return s;
  if (Status s = session_.wait_complete(); !s.ok()) return s;
  return check_errors();
}

Status Receiver::configure(const ReceiverSetup& setup) {
  const Profile& p = profile_;
  const bool vbw_absent = p.declares_absent("set_vbw");
  const double vbw = setup.vbw_hz == 0 ? setup.rbw_hz : setup.vbw_hz;
  // An explicit setting the instrument lacks is refused first; nothing is sent then.
  const auto absent = [&](std::string_view op) { return absent_operation(session_, p, op); };
  if (vbw_absent && setup.vbw_hz > 0) return absent("set_vbw");
  if (setup.reference_level_dbm && p.declares_absent("set_reference_level")) return absent("set_reference_level");
  if (setup.attenuation_db >= 0 && p.declares_absent("set_attenuation")) return absent("set_attenuation");

  // Every value is checked before the first command goes out.
  if (Status s = check_range("set_center", setup.center_hz, p.min_frequency_hz, p.max_frequency_hz, "Hz"); !s.ok()) return s;
  if (Status s = check_range("set_span", setup.span_hz, 0, p.max_frequency_hz - p.min_frequency_hz, "Hz"); !s.ok()) return s;
  if (!(setup.rbw_hz > 0) || !std::isfinite(setup.rbw_hz))
    return make_error(ErrorKind::invalid_argument, fmt::format("{}: set_rbw: {} Hz must be above 0; nothing sent", session_.name(), setup.rbw_hz));
  if (!(vbw > 0) || !std::isfinite(vbw))
    return make_error(ErrorKind::invalid_argument, fmt::format("{}: set_vbw: {} Hz must be above 0; nothing sent", session_.name(), vbw));
  if (setup.reference_level_dbm)
    if (Status s = check_range("set_reference_level", *setup.reference_level_dbm, p.min_power_dbm, p.max_power_dbm, "dBm"); !s.ok()) return s;
  if (setup.attenuation_db >= 0)
    if (Status s = check_range("set_attenuation", setup.attenuation_db, 0, p.max_attenuation_db, "dB"); !s.ok()) return s;
  if (Status s = send("set_center", {{"frequency_hz", setup.center_hz}}, false); !s.ok()) return s;
  if (Status s = send("set_span", {{"frequency_hz", setup.span_hz}}, false); !s.ok()) return s;
  if (Status s = send("set_rbw", {{"frequency_hz", setup.rbw_hz}}, false); !s.ok()) return s;
  if (!vbw_absent)
    if (Status s = send("set_vbw", {{"frequency_hz", vbw}}, false); !s.ok()) return s;
  if (setup.reference_level_dbm)
    if (Status s = send("set_reference_level", {{"power_dbm", *setup.reference_level_dbm}}, false); !s.ok()) return s;
  if (setup.attenuation_db >= 0) {
    if (Status s = send("set_attenuation", {{"db", setup.attenuation_db}}, false); !s.ok()) return s;
  } else if (p.has("set_attenuation_auto")) {
    if (Status s = send("set_attenuation_auto", {}, false); !s.ok()) return s;
  }
  if (p.check_errors == "each-step") return session_.drain_errors();
  return Status::success();
}

Status Receiver::set_center(double hz) {
  if (Status s = check_range("set_center", hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  return send("set_center", {{"frequency_hz", hz}}, true);
}

Status Receiver::post_center(double hz) {
  if (Status s = check_range("set_center", hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  return send("set_center", {{"frequency_hz", hz}}, false);
}

Status Receiver::set_max_hold(bool on) { return send(on ? "max_hold_on" : "max_hold_off", {}, true); }

Status Receiver::set_points(int count) {
  if (count < 1)
    return make_error(ErrorKind::invalid_argument, fmt::format("{}: set_points: {} points; nothing sent", session_.name(), count));
  return send("set_points", {{"count", std::int64_t{count}}}, true);
}

Status Receiver::set_sweep_time(double seconds) {
  if (!(seconds > 0) || !std::isfinite(seconds))
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("{}: set_sweep_time: {} s must be above 0; nothing sent", session_.name(), seconds));
  return send("set_sweep_time", {{"seconds", seconds}}, true);
}

Status Receiver::set_sweep_time_auto() { return send("set_sweep_time_auto", {}, true); }

Status Receiver::abort() { return profile_.has("abort") ? send("abort", {}, false) : Status::success(); }

Status Receiver::set_trigger_external(bool on) { return send(on ? "trigger_external" : "trigger_immediate", {}, true); }

Status Receiver::set_trigger_delay(double seconds) {
  if (Status s = check_range("set_trigger_delay", seconds, 0, 10, "s"); !s.ok()) return s;
  return send("set_trigger_delay", {{"seconds", seconds}}, true);
}

Status Receiver::trigger() { return send("trigger", {}, false); }

Status Receiver::sweep_and_wait(std::optional<double> center_hz) {
  std::string message;
  if (center_hz) {
    if (Status s = check_range("set_center", *center_hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
    auto center = expand_operation(session_, profile_, "set_center", {{"frequency_hz", *center_hz}});
    if (!center.ok()) return center.error();
    message = center.value();
  }
  auto trigger = expand_operation(session_, profile_, "trigger", {});
  if (!trigger.ok()) return trigger.error();
  // "A;:B" (SCPI-1999 Vol 1 6.2.4: the leading ':' returns B's header to the root).
  const std::string& t = trigger.value();
  if (message.empty()) {
    message = t;
  } else {
    message += (!t.empty() && (t.front() == ':' || t.front() == '*')) ? ";" + t : ";:" + t;
  }
  return session_.wait_complete_after(message);
}

Status Receiver::wait_sweep() {
  if (Status s = session_.wait_complete(); !s.ok()) return s;
  if (profile_.check_errors == "each-step") return session_.drain_errors();
  return Status::success();
}

Result<double> Receiver::read_peak_dbm() {
  if (Status s = send("peak_search", {}, false); !s.ok()) return s.error();
  auto y = session_.query_number(profile_.command("read_marker_y").text());
  if (!y.ok()) return y;
  if (profile_.check_errors == "each-step")
    if (Status s = session_.drain_errors(); !s.ok()) return s.error();
  return y;
}

Result<std::vector<double>> Receiver::read_trace_dbm() {
  const std::string& cmd = profile_.command("read_trace").text();
  Result<std::vector<double>> trace =
      profile_.trace_format == "real32"
          ? session_.query_real_block(cmd, 32, profile_.byte_order == "swapped" ? scpi::ByteOrder::swapped : scpi::ByteOrder::normal)
          : session_.query_numbers(cmd);
  if (!trace.ok()) return trace;
  if (profile_.check_errors == "each-step")
    if (Status s = session_.drain_errors(); !s.ok()) return s.error();
  return trace;
}

Status Receiver::check_errors() {
  if (profile_.check_errors == "never") return Status::success();
  return session_.drain_errors();
}

}  // namespace echoline::drivers
