// Puts the first N units of the lot through the station as the operator loop does (calibrate,
// test every unit, answer "calibration due" and "check standard due"), stops the daemon, and
// reads every tested unit's FINAL run from a copy of the run store file. Real processes and a
// real SQLite file; one driving thread. Throws std::runtime_error when the station cannot run.
#pragma once

#include <filesystem>
#include <string>
#include <vector>

#include "daemon/core/run_result.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/score/score_report.hpp"
#include "tests/soak/station_under_test.hpp"

namespace echoline::score {

// Calibrates, then tests serials[0..units) (all when units is 0 or more than the lot holds),
// then stops the daemon with SIGTERM. `tested` gets the serials in test order.
StationFigures test_lot(soak::StationUnderTest& station, int units, std::vector<std::string>* tested);

// Copies the store file (and its -wal / -shm files when present) to `copy`; the daemon has
// stopped, so the copy is consistent.
void copy_store(const std::filesystem::path& store_file, const std::filesystem::path& copy);

// The last stored run of each serial, in the order given, with its points; `runs_stored` gets
// each serial's number of stored runs. A serial with no stored run is named in `problems`.
std::vector<core::RunResult> final_runs(store::RunStore& store, const std::string& lot,
                                        const std::vector<std::string>& serials, std::vector<int>* runs_stored,
                                        std::vector<std::string>* problems);

}  // namespace echoline::score
