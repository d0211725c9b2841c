// A whole station on loopback for reliability and acceptance runs: echoline-sim or another bench
// program (a bench config and a lot: by default the instant bench and a generated lot), echolined
// pointed at the bench's endpoints, an API client on the daemon's Unix socket, the bench's fixture
// control port, and read-only access to the run store file.
// Throws std::runtime_error for set-up failures (an edge). Not thread-safe: one driving thread.
#pragma once

#include <filesystem>
#include <functional>
#include <memory>
#include <optional>
#include <random>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/client/api_client.hpp"
#include "daemon/client/line_connection.hpp"
#include "tests/soak/truth_check.hpp"
#include "tests/support/process.hpp"

namespace echoline::soak {

struct StationSetup {
  std::filesystem::path work_dir;   // REQUIRES: exists; gets the lot, configs, store and logs
  // The bench program: echoline-sim, or another program started the same way
  // (`PROGRAM --config <sim_config> --lot <lot> --log-file <file> --log-level warn`) that prints
  // the same "endpoint role=... address=..." lines, then "ready", and answers the same fixture
  // control requests (connect, units, truth).
  std::filesystem::path bench_program = testing::sim_binary();
  // The simulator's bench (coupler, standards, instruments).
  std::filesystem::path sim_config = testing::source_dir() / "config/sim/instant.jsonc";
  // A lot file for the simulator (--lot); empty: a lot generated into work_dir from the three
  // fields below. units() lists the serials of whichever lot the simulator loaded.
  std::filesystem::path lot_file;
  int lot_size = 240;               // units in the generated lot (serials SOAK915-00001 ...)
  std::uint64_t lot_seed = 915777;
  // The recipe the daemon runs (the station config's "recipe").
  std::filesystem::path recipe = testing::source_dir() / "config/recipes/whip915.jsonc";
  // The coupler's datasheet directivity written into the station config's fixture.
  double nominal_directivity_db = 30;
  // The station config's instrument profiles, calibration kit and fixture; the defaults are
  // echoline-sim's. A `fixture` object, when set, is written as it is (nominal_directivity_db unused).
  std::filesystem::path source_profile = testing::source_dir() / "config/instruments/sim-source.jsonc";
  std::filesystem::path receiver_profile = testing::source_dir() / "config/instruments/sim-receiver.jsonc";
  std::filesystem::path calibration_kit = testing::source_dir() / "config/kits/sim-kit.jsonc";
  std::optional<nlohmann::json> fixture;
  std::string lot_name = "SOAK-LOT";   // the lot the runs are stored under
  std::string client_name = "echoline-soak";   // the API hello's client name
  std::string station_name = "soak-bench";     // the station config's "station"
  std::filesystem::path central_settings;      // the station config's "central" ("" = none)
  std::string operator_name = "soak";          // the operator the runs are stored under
  // Use the simulator's switch (profile below) for the standards and the unit's arms (DUT and
  // DUT-OFFSET) instead of the control port; needed by recipes with the offset pair. The
  // harness still connects each unit to the socket on the control port.
  bool use_switch = false;
  std::filesystem::path switch_profile = testing::source_dir() / "config/instruments/sim-switch.jsonc";
};

// What one test of one unit came to, as the API reported it.
struct UnitOutcome {
  std::string verdict;     // pass | fail | inconclusive | aborted; "" when no result arrived
  std::string reason;
  std::string run_id;
  bool lost_daemon = false;   // the API link dropped before the result
  std::string refusal;        // test.start refused: the API error code
};

// A run as it is stored (read straight from the SQLite file).
struct StoredRun {
  std::string run_id, serial, verdict;
  int points_count = 0;       // the runs table's own count
  int readings = 0;           // rows in the readings table
  std::vector<StoredPoint> points;
};

class StationUnderTest {
 public:
  explicit StationUnderTest(StationSetup setup);
  ~StationUnderTest();
  StationUnderTest(const StationUnderTest&) = delete;
  StationUnderTest& operator=(const StationUnderTest&) = delete;

  void start_simulator();
  void start_daemon();             // writes the station config on first use; waits for "listening"
  void kill_daemon();              // SIGKILL, reaped
  // Runs `echolined --config <station> --rf-off` (what the service manager does after a crash);
  // returns its exit code, its output in *output.
  int rf_off(std::string* output);
  int stop_daemon();               // SIGTERM; exit code
  int daemon_pid() const;
  bool daemon_running();
  std::string daemon_unix_socket() const;

  // --- API (the daemon) ---
  void connect_api();              // new connection + hello (operator)
  client::ApiClient& api();
  nlohmann::json status();         // throws when the daemon does not answer
  // cal.start and every prompt answered after connecting the standard on the fixture. Returns
  // the calibration object, or nullopt (reason in *why) when the calibration ended in error.
  std::optional<nlohmann::json> calibrate(std::string* why);
  // cal.check (the check standard). True when it completed (drifted or not: see *why).
  bool check_standard(std::string* why);
  // Connects the unit at the test port, test.start, waits for its result event. With
  // `stop_after_s` > 0 the wait stops that long after test.start unless the result came first
  // (the caller kills the daemon): the outcome then has no verdict.
  UnitOutcome test_unit(const std::string& serial, double stop_after_s = 0);
  std::vector<nlohmann::json> lot_runs();   // runs.lot of the soak lot

  // --- simulator fixture control port ---
  nlohmann::json control(const nlohmann::json& request);   // throws on transport failure or ok:false
  std::vector<std::string> units();
  nlohmann::json truth(const std::string& serial, const std::vector<double>& frequencies_hz);
  nlohmann::json arm_fault(const std::string& role, const std::string& kind, double probability, std::uint64_t seed,
                           double delay_ms = 0);
  void clear_faults();
  // One SCPI query on a separate connection to the simulated source (e.g. "OUTP?"): the
  // harness's own look at the instrument, independent of the daemon.
  std::string query_source(const std::string& query);

  // --- the run store file, read-only ---
  std::filesystem::path store_file() const;
  std::filesystem::path station_config_file() const { return setup_.work_dir / "station.jsonc"; }
  std::string integrity_check() const;                 // "ok" when PRAGMA integrity_check is clean
  std::vector<StoredRun> stored_runs(bool with_points) const;

  const StationSetup& setup() const { return setup_; }
  const std::string& lot_name() const { return setup_.lot_name; }
  std::filesystem::path log_dir() const { return setup_.work_dir / "log"; }

 private:
  void write_lot();
  void write_station_config();
  nlohmann::json wait_job_end(long id, std::string* why, double stop_after_s = 0, bool* stopped = nullptr);

  StationSetup setup_;
  std::optional<testing::ChildProcess> sim_;
  std::optional<testing::ChildProcess> daemon_;
  std::string source_address_, receiver_address_, control_address_, switch_address_;
  std::unique_ptr<client::ApiClient> api_;
  std::unique_ptr<client::LineConnection> control_;
  std::string unix_socket_;
};

// Resident set size of a process in kB (VmRSS of /proc/<pid>/status); -1 when unreadable.
long resident_kb(int pid);

}  // namespace echoline::soak
