// Source role driver: range checks, template expansion, error policy.
#include "drivers/source.hpp"
#include "drivers/role_operation.hpp"

#include <cmath>

#include <fmt/format.h>

namespace echoline::drivers {

Source::Source(ScpiSession& session, const Profile& profile) : session_(session), profile_(profile) {}

Status Source::check_range(std::string_view operation, double value, double min, double max,
                           std::string_view unit) const {
  return check_operation_range(session_, profile_, operation, value, min, max, unit);
}

Status Source::send(std::string_view operation, std::initializer_list<TemplateArg> args, bool check) {
  return send_operation(session_, profile_, operation, args, check);
}

Status Source::initialize() {
  if (profile_.reset_on_initialize) {
    if (Status s = session_.reset(); !s.ok()) return s;
  }
  if (Status s = session_.clear(); !s.ok()) return s;
  for (const auto& line : profile_.init)
    if (Status s = session_.write(line); !s.ok()) return s;
  // RF off until a sweep asks for it.
  if (Status s = send("set_output", {{"state", false}}, false); !s.ok()) return s;
  if (Status s = session_.wait_complete(); !s.ok()) return s;
  return check_errors();
}

Status Source::set_frequency(double hz) {
  if (Status s = check_range("set_frequency", hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  return send("set_frequency", {{"frequency_hz", hz}}, true);
}

Status Source::set_power(double dbm) {
  if (Status s = check_range("set_power", dbm, profile_.min_power_dbm, profile_.max_power_dbm, "dBm"); !s.ok()) return s;
  return send("set_power", {{"power_dbm", dbm}}, true);
}

Status Source::set_output(bool on) { return send("set_output", {{"state", on}}, true); }

Status Source::post_frequency(double hz) {
  if (Status s = check_range("set_frequency", hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  return send("set_frequency", {{"frequency_hz", hz}}, false);
}

Status Source::sync() { return session_.wait_complete(); }

Status Source::move_and_sync(double hz) {
  if (Status s = check_range("set_frequency", hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  auto command = expand_operation(session_, profile_, "set_frequency", {{"frequency_hz", hz}});
  if (!command.ok()) return command.error();
  return session_.wait_complete_after(command.value());
}

Status Source::post_sweep(double start_hz, double stop_hz, double seconds) {
  if (Status s = check_range("sweep_start", start_hz, profile_.min_frequency_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  if (Status s = check_range("sweep_stop", stop_hz, start_hz, profile_.max_frequency_hz, "Hz"); !s.ok()) return s;
  if (!(seconds > 0) || !std::isfinite(seconds))
    return make_error(ErrorKind::invalid_argument, fmt::format("{}: sweep_time: {} s must be above 0; nothing sent", session_.name(), seconds));
  if (Status s = send("sweep_start", {{"frequency_hz", start_hz}}, false); !s.ok()) return s;
  if (Status s = send("sweep_stop", {{"frequency_hz", stop_hz}}, false); !s.ok()) return s;
  return send("sweep_time", {{"seconds", seconds}}, false);
}

Status Source::post_sweep_mode(bool swept) { return send("sweep_mode", {{"mode", std::string(swept ? "SWE" : "CW")}}, false); }

Status Source::check_errors() {
  if (profile_.check_errors == "never") return Status::success();
  return session_.drain_errors();
}

}  // namespace echoline::drivers
