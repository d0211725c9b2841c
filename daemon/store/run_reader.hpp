// What reports and exports read runs from: the station's run store (RunStore) or the central
// database (central::CentralReader). Implementations say their own threading rule.
#pragma once

#include <optional>
#include <string_view>
#include <vector>

#include "daemon/core/run_result.hpp"
#include "drivers/result.hpp"

namespace echoline::store {

class RunReader {
 public:
  virtual ~RunReader() = default;
  // One run with its points. Unknown id: ErrorKind::invalid_argument.
  virtual Result<core::RunResult> load_run(std::string_view run_id) = 0;
  // A serial's or a lot's runs, oldest first (started_utc, then insertion).
  virtual Result<std::vector<core::RunResult>> history(std::string_view serial, bool with_points) = 0;
  virtual Result<std::vector<core::RunResult>> lot_runs(std::string_view lot, bool with_points) = 0;
  virtual Result<std::optional<core::CalibrationRecord>> load_calibration(std::string_view id) = 0;
  // The text of the recipe with this content hash, as stored with the runs it judged; nullopt
  // when it is not stored (runs older than recipe texts, or a text never sent).
  virtual Result<std::optional<std::string>> recipe_text(std::string_view content_hash) = 0;
};

}  // namespace echoline::store
