// Switch role driver: selects which standard or DUT the test port sees (OPEN|SHORT|LOAD|DUT),
// through the profile's select template and position tokens. One user thread at a time;
// REQUIRES: the session and the profile outlive the driver.
#pragma once

#include <string_view>

#include "drivers/profile.hpp"
#include "drivers/result.hpp"
#include "drivers/scpi_session.hpp"

namespace echoline::drivers {

class Switch {
 public:
  Switch(ScpiSession& session, const Profile& profile);
  Switch(const Switch&) = delete;
  Switch& operator=(const Switch&) = delete;

  Status initialize();                            // [*RST] *CLS, init lines, *OPC?, error queue
  // Unknown position -> invalid_argument naming the allowed ones, nothing sent. Waits *OPC?
  // so the relay has settled when this returns; checks errors when policy is "each-step".
  Status select(std::string_view position /* OPEN|SHORT|LOAD|DUT */);
  Status check_errors();

  const Profile& profile() const { return profile_; }
  ScpiSession& session() { return session_; }

 private:
  ScpiSession& session_;
  const Profile& profile_;
};

}  // namespace echoline::drivers
