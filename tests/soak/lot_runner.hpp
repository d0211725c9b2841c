// Drives a lot through the station as an operator would: connect the unit, start the test,
// read the verdict, retest an aborted unit (at most twice), answer "calibration due" and
// "check standard due" by doing them. Counts everything. Not thread-safe: one driving thread.
#pragma once

#include <cstdint>
#include <functional>
#include <map>
#include <string>
#include <vector>

#include "tests/soak/station_under_test.hpp"

namespace echoline::soak {

struct LotCounters {
  int units_tested = 0;        // distinct units started
  int results = 0;             // result events received (runs the daemon reported)
  int aborted = 0;             // result events with verdict aborted
  int retries = 0;             // extra attempts after an aborted run (or a killed daemon)
  int units_never_judged = 0;  // still aborted after every attempt
  int lost_links = 0;          // the API link dropped during a test
  int calibrations = 0;        // cal.start runs that produced a valid calibration
  int calibration_failures = 0;
  int checks = 0;              // check-standard measurements completed
  int check_failures = 0;
  std::map<std::string, int> verdicts;   // final verdict per unit, counted
  std::vector<std::string> problems;     // anything unexpected, in words
};

// Per-unit fault rates (chance that one unit's run meets the fault), before conversion to the
// simulator's per-reply (per-message for error-entry) probabilities.
struct FaultPlan {
  double no_reply = 0.01;
  double drop = 0.005;
  double garble = 0.005;
  double error_entry = 0.005;
  double slow_reply = 0.02;
  double slow_delay_ms = 400;   // below the profiles' 2 s read timeout: slow, not lost
  double scale = 1;             // multiplies every rate
  std::uint64_t seed = 1;
};

class LotRunner {
 public:
  // REQUIRES: station outlives the runner; the daemon runs and the API is connected.
  LotRunner(StationUnderTest& station, LotCounters& counters);

  // Calibrates, retrying up to `attempts` times. False when no valid calibration resulted.
  bool calibrate(int attempts = 5);
  // Tests one unit; retests an aborted run up to twice. `kill_after_s` (> 0) stops waiting that
  // long after test.start unless the result came first (the caller kills the daemon).
  // Returns the final verdict ("" when the link was lost or the wait was stopped).
  std::string test(const std::string& serial, double kill_after_s = 0);

  // Arms the plan's faults on source and receiver, converting per-unit rates with the replies
  // and messages one unit's run takes (measured by measure_unit_traffic).
  void arm_faults(const FaultPlan& plan);
  // Tests `serial` once with no faults and reads the simulator's counters around it.
  void measure_unit_traffic(const std::string& serial);
  const std::vector<std::string>& tested_serials() const { return order_; }

 private:
  bool handle_refusal(const UnitOutcome& o);
  StationUnderTest& st_;
  LotCounters& c_;
  std::vector<std::string> order_;    // serials in the order first tested
  std::map<std::string, bool> seen_;
  // Per unit run, per role: replies and program messages (from the simulator's status).
  std::map<std::string, double> replies_per_unit_, messages_per_unit_;
};

}  // namespace echoline::soak
