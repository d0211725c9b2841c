// The operator console (`echoline station`): first screen with the safety text, the scan loop,
// retest question, calibration walk-through, progress, the large verdict with what to do with
// the unit and a return-loss plot, and the end-of-session summary. A lost daemon link is waited
// out (reconnect_wait.hpp) and the interrupted unit tested again. Talks to the daemon through
// ApiClient; reads the operator (or a piped scanner) through LineInput. One thread.
#pragma once

#include <functional>
#include <map>
#include <set>
#include <memory>
#include <optional>
#include <ostream>
#include <string>
#include <vector>

#include "daemon/client/api_client.hpp"
#include "daemon/client/fixture_control.hpp"
#include "daemon/client/line_input.hpp"
#include "daemon/store/yield.hpp"
#include "daemon/client/reconnect_wait.hpp"
#include "daemon/client/text_plot.hpp"

namespace echoline::client {

struct ConsoleOptions {
  std::string lot;              // stored with every run ("" = none)
  std::string operator_name;    // stored with every run ("" = none)
  std::string serial_pattern;   // station's serial regex, checked before the fixture is touched ("" = daemon checks)
  std::string sim_fixture;      // SIMULATOR ONLY: fixture control address ("" = a person connects units)
  bool output_is_tty = false;   // progress in place
  bool colour = false;          // ANSI colour in the banner
  Millis job_timeout{600000};   // longest silence from the daemon during a test or calibration
  Seconds reconnect_timeout{0}; // how long to wait for a lost daemon before ending with exit 3; 0 = forever
};

// Where the console finds a run's points for its plot (the API's result event carries none).
struct PlotSource {
  std::function<Result<std::vector<PlotPoint>>(const std::string& run_id)> points;   // empty = no plot
  std::vector<PlotLimit> limits;
};

struct SessionSummary {
  int runs = 0;
  std::map<std::string, int> runs_by_verdict;         // pass/fail/inconclusive/aborted
  std::map<std::string, std::string> final_verdict;   // serial -> verdict of its latest run
  std::vector<store::RunOutcome> outcomes;            // every run of the session, in run order
  int interrupted = 0;                                // tests cut off by a lost daemon link (no result)
  std::vector<std::string> interrupted_serials;       // ... their serials, in order
  // Yield as the store defines it (daemon/store/yield.hpp): units whose latest finished run
  // passed / units with a finished (non-aborted) run; 0 when none.
  double yield() const;
  int units_judged() const;
};

class Console {
 public:
  // REQUIRES: api, input and out outlive the console; api has said hello.
  Console(ApiClient& api, LineInput& input, std::ostream& out, ConsoleOptions options, PlotSource plot);

  // Runs until EOF, "q"/"quit", or a daemon link that stays lost past the reconnect timeout.
  // Returns an exit code: kExitUnreachable when the daemon stayed away; kExitInstrument when a
  // unit scanned in the session was left untested because of the instruments (a calibration or
  // test that stopped on instrument trouble, or the daemon refusing for it) and not tested later;
  // else kExitOk, whatever the verdicts.
  int run();
  const SessionSummary& summary() const { return summary_; }

 private:
  enum class Outcome { done, lost };
  Outcome first_screen();
  Outcome scan_loop();
  // `again`: the serial is re-queued after an interrupted test (no history question).
  Outcome test_unit(const std::string& serial, bool again);
  // Walks the operator through cal.start (or cal.check); true when a valid calibration (or a
  // check within its limit) resulted.
  Result<bool> calibrate(bool check_only);
  // Events of request `id` until its result or error event, which is returned.
  Result<nlohmann::json> job_events(long id, const std::string& label);
  // Waits for the operator's Enter; false when cancelled. See README for piped input.
  bool confirm(const std::string& prompt);
  // A serial scanned while a prompt waited: kept for the scan loop, and the operator told so.
  void hold_scanned(const std::string& serial);
  void show_run(const nlohmann::json& run);
  void show_plot(const std::string& run_id);
  void print_summary();
  Outcome lost(const Error& e);
  // After a lost link: says so, waits for the daemon (policy from the options) and says when it
  // is back. `serial`: the unit whose test was cut off ("" = none). False when it stayed away.
  bool recover(const std::string& serial);

  ApiClient& api_;
  LineInput& input_;
  std::ostream& out_;
  ConsoleOptions options_;
  PlotSource plot_;
  std::unique_ptr<FixtureControl> fixture_;
  SessionSummary summary_;
  Error lost_error_;                         // why the link was lost (set by lost())
  std::optional<std::string> requeued_;      // interrupted serial to test before the next input line
  std::map<std::string, int> inconclusive_count_;
  bool plot_warned_ = false;
  bool calibration_instrument_trouble_ = false;   // the last calibrate() ended on instrument trouble
  std::string testing_serial_;                     // the unit of the test in progress (its second connection)
  std::set<std::string> untested_by_instruments_;  // serials left untested because of the instruments
  // A unit not tested because of instrument trouble: said on screen, counted for the exit code.
  void not_tested_by_instruments(const std::string& serial);
};

}  // namespace echoline::client
