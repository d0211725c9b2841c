// Source role driver: a signal generator driven only through its profile's command templates.
// Checks values against the profile's limits before anything is sent. One user thread at a time;
// REQUIRES: the session and the profile outlive the driver.
// RF EXPOSURE: set_output(true) puts RF on the test port; with an antenna connected it radiates.
#pragma once

#include "drivers/profile.hpp"
#include "drivers/result.hpp"
#include "drivers/scpi_session.hpp"

namespace echoline::drivers {

class Source {
 public:
  Source(ScpiSession& session, const Profile& profile);
  Source(const Source&) = delete;
  Source& operator=(const Source&) = delete;

  // [*RST] *CLS, the profile's init lines, *OPC?, then the error queue (unless policy "never").
  // Output is switched off first when the profile defines set_output.
  Status initialize();
  Status set_frequency(double hz);      // range-checked; error check when policy is "each-step"
  Status set_power(double dbm);         // range-checked
  Status set_output(bool on);           // RF on/off at the output connector
  Status post_frequency(double hz);     // range-checked, then sent without waiting or checking (pipelined); caller syncs later
  Status sync();                        // *OPC?
  Status move_and_sync(double hz);      // range-checked; set_frequency and *OPC? as one message, waits
  Status check_errors();                // SYST:ERR? until empty, unless the profile's policy is "never"
  // Swept output (fast capture); config error when the profile lacks the sweep operations. None
  // waits or reads the error queue: the caller checks once the set-up is complete.
  Status post_sweep(double start_hz, double stop_hz, double seconds);   // range-checked: sweep_start, sweep_stop, sweep_time
  Status post_sweep_mode(bool swept);   // sweep_mode: {mode} is SWE when swept, CW otherwise (SCPI-1999 [SOURce:]FREQuency:MODE)

  const Profile& profile() const { return profile_; }
  ScpiSession& session() { return session_; }

 private:
  Status send(std::string_view operation, std::initializer_list<TemplateArg> args, bool check);
  Status check_range(std::string_view operation, double value, double min, double max, std::string_view unit) const;
  ScpiSession& session_;
  const Profile& profile_;
};

}  // namespace echoline::drivers
