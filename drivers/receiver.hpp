// Receiver role driver: a spectrum analyzer driven only through its profile's command templates.
// Checks settings against the profile's limits before anything is sent. One user thread at a time;
// REQUIRES: the session and the profile outlive the driver.
// EQUIPMENT SAFETY: max_safe_input_dbm() is the damage level at the input; callers must keep the
// worst-case power at the input below it (the daemon refuses recipes that could exceed it).
#pragma once

#include <optional>
#include <vector>

#include "drivers/profile.hpp"
#include "drivers/result.hpp"
#include "drivers/scpi_session.hpp"

namespace echoline::drivers {

struct ReceiverSetup {
  double center_hz = 0;
  double span_hz = 0;               // 0 = zero span
  double rbw_hz = 0;
  double vbw_hz = 0;                // 0 = same as RBW (nothing sent when the profile declares set_vbw absent)
  std::optional<double> reference_level_dbm;   // none = left to the instrument
  double attenuation_db = -1;       // < 0 = auto: set_attenuation_auto when the profile has it, else left to the instrument
};
// A setting the profile declares absent (set_vbw, set_reference_level, set_attenuation) is
// refused when asked for explicitly (vbw_hz > 0, a reference level, attenuation_db >= 0),
// naming the operation and the profile; nothing is sent then.

class Receiver {
 public:
  Receiver(ScpiSession& session, const Profile& profile);
  Receiver(const Receiver&) = delete;
  Receiver& operator=(const Receiver&) = delete;

  // [*RST] *CLS, init lines, single-sweep mode, trace format (when the profile has the
  // operations), *OPC?, then the error queue (unless policy "never").
  Status initialize();
  Status configure(const ReceiverSetup& setup);   // all settings range-checked before the first is sent
  Status set_center(double hz);
  Status post_center(double hz);      // pipelined: range-checked, sent, no wait, no check
  Status set_max_hold(bool on);       // max_hold_on / max_hold_off (config error when the profile lacks them)
  Status set_points(int count);       // set_points
  Status set_sweep_time(double s);    // set_sweep_time; s > 0
  Status set_sweep_time_auto();       // set_sweep_time_auto
  // Sweeps start on the external trigger input (trigger_external), TRIGger:DELay after it
  // (set_trigger_delay, 0..10 s); trigger_immediate returns to starting at INIT.
  Status set_trigger_external(bool on);
  Status set_trigger_delay(double s);
  // Cancels a sweep in progress or armed for a trigger (abort; nothing sent when the profile
  // has no such operation).
  Status abort();
  Status trigger();                   // start one single sweep (e.g. INIT:IMM), no wait
  Status wait_sweep();                // *OPC?
  // One message: [set_center;]trigger;*OPC? -- moves (when center_hz is given, range-checked),
  // sweeps once and waits for the sweep's end. No error check.
  Status sweep_and_wait(std::optional<double> center_hz);
  Result<double> read_peak_dbm();     // peak_search then read_marker_y
  Result<std::vector<double>> read_trace_dbm();   // read_trace, ASCII list or REAL,32 block per profile
  Status check_errors();

  double max_safe_input_dbm() const { return profile_.max_safe_input_dbm; }
  const Profile& profile() const { return profile_; }
  ScpiSession& session() { return session_; }

 private:
  Status send(std::string_view operation, std::initializer_list<TemplateArg> args, bool check);
  Status check_range(std::string_view what, double value, double min, double max, std::string_view unit) const;
  ScpiSession& session_;
  const Profile& profile_;
};

}  // namespace echoline::drivers
