// Benchmark rig: a real echoline-sim and a real echolined on loopback, the daemon's API over its
// Unix socket and the sim's fixture control port; calibrates through the API (answering each
// prompt after connecting the standard) and times unit tests from test.start to the result.
// One thread drives a rig; owns child processes and sockets (copy deleted). Throws on failure.
#pragma once

#include <filesystem>
#include <memory>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/client/api_client.hpp"
#include "daemon/client/line_connection.hpp"
#include "tests/support/process.hpp"

namespace echoline::bench {

// A running echoline-sim with its endpoints and control connection.
class SimProcess {
 public:
  // profile: "instant" or "bench". Fixed ports in the config are replaced by free ones.
  SimProcess(const std::filesystem::path& work_dir, const std::string& config_name, const std::string& profile);
  SimProcess(const SimProcess&) = delete;
  SimProcess& operator=(const SimProcess&) = delete;
  ~SimProcess();

  const std::string& source_address() const { return source_; }
  const std::string& receiver_address() const { return receiver_; }
  // One control request; throws when the reply is not ok.
  nlohmann::json control(const nlohmann::json& request);
  std::vector<std::string> units();

 private:
  testing::ChildProcess child_;
  std::string source_, receiver_, control_;
  std::unique_ptr<client::LineConnection> control_link_;
};

// Writes `base` recipe with settle_s replaced (when >= 0) and the calibration policy relaxed for
// long runs (no unit limit, no check standard); plan and receiver settings unchanged.
std::filesystem::path write_recipe(const std::filesystem::path& base, const std::filesystem::path& out,
                                   double settle_s, int points = 0);

struct UnitTiming {
  double seconds = 0;      // test.start sent -> result event received
  std::string verdict;
  int points = 0;
  double sweep_s = 0;      // the daemon's own timing of the sweep (run.timings.sweep_s)
  double run_s = 0;        // the daemon's own timing of the run before the store commit (total_s)
  std::string run_id;
};

class DaemonProcess {
 public:
  // start_pulse_cable: the station config declares the source's ramp-start pulse cabled to the
  // receiver's external trigger (fixture.start_pulse_cable; the bench sim config has the cable).
  DaemonProcess(const std::filesystem::path& work_dir, SimProcess& sim, const std::filesystem::path& recipe,
                bool start_pulse_cable = false);
  DaemonProcess(const DaemonProcess&) = delete;
  DaemonProcess& operator=(const DaemonProcess&) = delete;
  ~DaemonProcess();

  // cal.start, then for each prompt: connect the standard on the sim, cal.answer. Throws unless valid.
  double calibrate();
  // Connects `sim_unit` on the sim, runs test.start for `serial`, waits for the result event.
  UnitTiming test_unit(const std::string& sim_unit, const std::string& serial);
  // The stored run with its points (run.get): "points" rows as "point_columns" names them.
  nlohmann::json run(const std::string& run_id);
  int pid() const { return child_.pid(); }
  long rss_kb() const;   // VmRSS from /proc/<pid>/status

 private:
  void drain_output();
  SimProcess& sim_;
  testing::ChildProcess child_;
  std::unique_ptr<client::ApiClient> api_;
};

}  // namespace echoline::bench
