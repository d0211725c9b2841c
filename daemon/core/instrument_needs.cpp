// Profile operations a recipe needs (instrument_needs.hpp).
#include "daemon/core/instrument_needs.hpp"

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"

namespace echoline::core {

const std::vector<std::string_view>& fast_capture_operations(std::string_view role) {
  static const std::vector<std::string_view> source = {"sweep_start", "sweep_stop", "sweep_time", "sweep_mode"};
  static const std::vector<std::string_view> receiver = {"set_points", "set_sweep_time", "set_sweep_time_auto",
                                                         "max_hold_on", "max_hold_off"};
  static const std::vector<std::string_view> none;
  if (role == "source") return source;
  if (role == "receiver") return receiver;
  return none;
}

std::vector<NeededOperation> needed_operations(const Recipe& r) {
  std::vector<NeededOperation> out;
  // Fast capture always runs VBW = RBW ("same as RBW"), which a receiver without VBW also meets.
  if (r.receiver.vbw_hz > 0 && r.mode == SweepMode::step)
    out.push_back({"receiver", "set_vbw", "/receiver/vbw_hz", fmt::format("a VBW of {}", format_frequency(r.receiver.vbw_hz))});
  if (r.receiver.reference_level_dbm)
    out.push_back({"receiver", "set_reference_level", "/receiver/reference_level_dbm",
                   fmt::format("a reference level of {} dBm", *r.receiver.reference_level_dbm)});
  if (r.receiver.attenuation_db >= 0)
    out.push_back({"receiver", "set_attenuation", "/receiver/attenuation_db",
                   fmt::format("an input attenuation of {} dB", r.receiver.attenuation_db)});
  if (r.mode == SweepMode::fast_capture) {
    for (std::string_view role : {std::string_view("source"), std::string_view("receiver")})
      for (std::string_view op : fast_capture_operations(role)) out.push_back({role, op, "/mode", "fast capture"});
  }
  return out;
}

}  // namespace echoline::core
