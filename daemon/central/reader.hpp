// Reading the central database (as the reader role): runs by id, serial or lot across every
// station, the calibrations and recipe texts they used, and each run's content hash. Serves the client's
// `runs`, `report` and `export` when --db names the central database. Not thread-safe: one
// connection, one caller.
#pragma once

#include <map>
#include <memory>
#include <string>

#include <pqxx/connection>

#include "daemon/central/settings.hpp"
#include "daemon/store/run_reader.hpp"

namespace echoline::central {

class CentralReader : public store::RunReader {
 public:
  // Connects and checks the schema version. Errors are scrubbed of the password.
  static Result<std::unique_ptr<CentralReader>> open(const CentralSettings& settings);
  ~CentralReader() override;

  Result<core::RunResult> load_run(std::string_view run_id) override;
  Result<std::vector<core::RunResult>> history(std::string_view serial, bool with_points) override;
  Result<std::vector<core::RunResult>> lot_runs(std::string_view lot, bool with_points) override;
  Result<std::optional<core::CalibrationRecord>> load_calibration(std::string_view id) override;
  // echoline.recipes.text of that content hash (the station sends it with the first run it judged).
  Result<std::optional<std::string>> recipe_text(std::string_view content_hash) override;

  // run id -> content hash as stored, for every run of one station instance (or all when "").
  Result<std::map<std::string, std::string>> content_hashes(std::string_view station_instance = {});
  // run id -> SHA-256 of the stored document text, computed here (independent of the column).
  Result<std::map<std::string, std::string>> document_hashes(std::string_view station_instance = {});

 private:
  explicit CentralReader(CentralSettings settings, std::unique_ptr<pqxx::connection> conn);
  Result<std::vector<core::RunResult>> select(std::string_view where, std::string_view key, bool with_points,
                                              std::string_view doing);
  Error failure(std::string_view doing, std::string_view what) const;
  Result<std::map<std::string, std::string>> hashes(std::string_view station_instance, bool recompute);
  CentralSettings settings_;
  std::unique_ptr<pqxx::connection> conn_;
};

}  // namespace echoline::central
