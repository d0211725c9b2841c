// The station: instruments, active recipe, calibration state and run store, and the three jobs
// run against them — a unit test, a calibration, a check-standard measurement.
// Threading: run_* are synchronous and must be called from ONE worker thread at a time (the API
// handler guarantees it); status/precheck/history calls are safe from any thread (state copied
// under a mutex; the RunStore serialises itself).
#pragma once

#include <atomic>
#include <functional>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include <nlohmann/json.hpp>

#include "daemon/central/forwarder.hpp"
#include "daemon/core/calibration.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/core/run_result.hpp"
#include "daemon/service/instruments.hpp"
#include "daemon/service/sweep_engine.hpp"
#include "daemon/store/run_store.hpp"
#include "drivers/station_config.hpp"

namespace echoline::service {

// Cancels the job in progress; the reason ends up in the aborted run. Thread-safe.
class CancelToken {
 public:
  void cancel(std::string reason);
  void reset();
  bool cancelled() const { return flag_.load(); }
  std::string reason() const;
  const std::atomic<bool>& flag() const { return flag_; }

 private:
  std::atomic<bool> flag_{false};
  mutable std::mutex mu_;
  std::string reason_;
};

// Asks the operator to connect a standard. Returns false when the job was cancelled instead.
class Prompter {
 public:
  virtual ~Prompter() = default;
  virtual bool wait_connected(const std::string& standard) = 0;
};

struct TestRequest {
  std::string serial, lot, operator_name;
  bool retest = false;
};

// A request the station will not start, with its API error code (API.md).
struct Refusal {
  std::string code;
  std::string message;
};

struct TestOutcome {
  core::RunResult run;
  Status stored;   // the store's answer; the run is reported either way
};

struct CalibrationOutcome {
  std::optional<core::CalibrationRecord> record;   // set when measured (valid or not)
  std::optional<Error> error;                      // set when it could not complete
};

struct CheckOutcome {
  bool drifted = false;
  std::string message;
  std::optional<Error> error;
};

using StandardProgressFn = std::function<void(const std::string& standard, int point, int of)>;

class Station {
 public:
  // Loads the recipe and profiles, opens the store (data_dir/<station>.sqlite) and loads the
  // latest calibration. Throws (ConfigError / std::runtime_error) naming what is wrong.
  explicit Station(drivers::StationConfig config);
  ~Station();
  Station(const Station&) = delete;
  Station& operator=(const Station&) = delete;

  // Connects the instruments once (worker thread or before the API starts); failures are
  // logged and shown in status, and retried before each job.
  void connect_instruments();
  // One more bring-up of every instrument that is not ready (one attempt each); the result
  // shows in status. Call only while no job runs (the job's thread owns the instruments).
  void probe_instruments();
  // Closes the instrument links and the store (shutdown; no job may run).
  void shutdown();

  // --- any thread ---
  nlohmann::json status_json() const;
  nlohmann::json calibration_json() const;
  // Outbox depth, oldest unforwarded run, last successful forward, the forwarder's state, and
  // how long the store took to record runs (API.md, status).
  nlohmann::json forwarding_json() const;
  std::optional<Refusal> precheck_test(const TestRequest& request) const;
  std::vector<std::string> standards() const;        // calibration order
  // What the operator connects, in plain words, for standards that need saying ("61.1 ohm
  // termination, no offset" for a kit's mismatch standard, the unit behind the offset line for
  // DUT-OFFSET); "" for OPEN, SHORT and LOAD.
  std::string standard_description(const std::string& standard) const;
  int plan_points() const;
  const drivers::StationConfig& config() const { return config_; }
  store::RunStore& store() { return *store_; }
  std::shared_ptr<const core::Recipe> recipe() const;

  // --- the worker thread ---
  // `prompter`: asks the operator to fit the offset line for the second reading of the offset
  // pair when no switch arm reaches the unit through it (nullptr: such a run is aborted).
  TestOutcome run_test(const TestRequest& request, const CancelToken& cancel, const ProgressFn& progress,
                       Prompter* prompter = nullptr);
  CalibrationOutcome run_calibration(Prompter& prompter, const CancelToken& cancel, const StandardProgressFn& progress);
  CheckOutcome run_check(Prompter& prompter, const CancelToken& cancel, const StandardProgressFn& progress);
  // Loads and checks another recipe; the calibration stays only when made for the same plan.
  // Throws drivers::ConfigError for a bad file; returns findings (errors refuse the recipe).
  Result<nlohmann::json> select_recipe(const std::filesystem::path& path);

 private:
  core::StationCapability capability(const core::Recipe& recipe) const;
  std::vector<std::string> standards_of(const core::Recipe& recipe) const;   // needs no lock
  std::string next_run_id(double now_s);
  void note_commit(double ms);
  Result<std::vector<core::Reading>> sweep_standard(const std::string& standard, const core::Recipe& recipe,
                                                    Prompter& prompter, const CancelToken& cancel,
                                                    const StandardProgressFn& progress, bool connect = true);

  drivers::StationConfig config_;
  core::CalKit kit_;   // the calibration kit the station config names (or the built-in conservative one)
  std::unique_ptr<Instruments> instruments_;
  std::unique_ptr<store::RunStore> store_;
  std::unique_ptr<central::Forwarder> forwarder_;   // null when the config names no central database

  mutable std::mutex mu_;   // guards everything below
  std::shared_ptr<const core::Recipe> recipe_;
  std::optional<core::CalibrationRecord> calibration_;
  double calibration_created_s_ = 0;
  int units_since_check_ = 0;
  // Why a calibration is due whatever its age: a drifted check standard, or the newest
  // calibration is not valid ("the last calibration (<id>) was not valid: <why>"). Cleared by a
  // valid calibration.
  std::string check_failure_;
  std::uint64_t run_counter_ = 0;   // counts on from the store's last run number
  std::string instance_id_;          // the store's random instance id (run ids)
  // How long the store took to record runs (begin_run + save_run of one run), for status: the
  // forwarder shares the store file, and this shows whether it ever held a test up.
  double commit_ms_last_ = 0, commit_ms_max_ = 0;
  double lock_wait_ms_last_ = 0, lock_wait_ms_max_ = 0;   // of those, waiting for the forwarder's lock
  long long commits_ = 0;
};

// The run as the API shows it (the store's JSON without points; "points_count" = stored points).
nlohmann::json run_json(const core::RunResult& run);
// A calibration record's summary (no traces).
nlohmann::json calibration_summary_json(const core::CalibrationRecord& cal);

}  // namespace echoline::service
