// The lot through the station and its final runs (lot_session.hpp).
#include "tests/score/lot_session.hpp"

#include <chrono>
#include <cstdio>
#include <map>
#include <stdexcept>

#include <fmt/format.h>

#include "tests/soak/lot_runner.hpp"

namespace echoline::score {

namespace fs = std::filesystem;
using Clock = std::chrono::steady_clock;

StationFigures test_lot(soak::StationUnderTest& station, int units, std::vector<std::string>* tested) {
  StationFigures f;
  const auto t0 = Clock::now();
  const std::vector<std::string> serials = station.units();
  const std::size_t n = units <= 0 ? serials.size() : std::min<std::size_t>(serials.size(), static_cast<std::size_t>(units));
  soak::LotCounters c;
  soak::LotRunner runner(station, c);
  if (!runner.calibrate()) throw std::runtime_error("the initial calibration failed (see the daemon log)");
  for (std::size_t i = 0; i < n; ++i) {
    runner.test(serials[i]);
    if ((i + 1) % 100 == 0 && i + 1 < n) {
      std::fprintf(stderr, "echoline-score: %zu of %zu units, %.0f s\n", i + 1, n,
                   std::chrono::duration<double>(Clock::now() - t0).count());
    }
  }
  f.test_s = std::chrono::duration<double>(Clock::now() - t0).count();
  f.daemon_exit = station.stop_daemon();
  if (f.daemon_exit != 0) f.problems.push_back(fmt::format("the daemon did not stop cleanly on SIGTERM (exit {})", f.daemon_exit));
  f.units_tested = c.units_tested;
  f.results = c.results;
  f.aborted_runs = c.aborted;
  f.retries = c.retries;
  f.calibrations = c.calibrations;
  f.checks = c.checks;
  f.problems.insert(f.problems.end(), c.problems.begin(), c.problems.end());
  if (c.units_never_judged > 0) f.problems.push_back(fmt::format("{} unit(s) still aborted after every retest", c.units_never_judged));
  if (tested) *tested = runner.tested_serials();
  return f;
}

void copy_store(const fs::path& store_file, const fs::path& copy) {
  for (const char* suffix : {"", "-wal", "-shm"}) {
    const fs::path from = store_file.string() + suffix;
    const fs::path to = copy.string() + suffix;
    fs::remove(to);
    if (fs::exists(from)) fs::copy_file(from, to);
  }
}

std::vector<core::RunResult> final_runs(store::RunStore& store, const std::string& lot,
                                        const std::vector<std::string>& serials, std::vector<int>* runs_stored,
                                        std::vector<std::string>* problems) {
  auto all = store.lot_runs(lot, true);
  if (!all) throw std::runtime_error("store copy: " + all.error().message);
  std::map<std::string, std::size_t> last;   // serial -> index of its latest run (oldest first)
  std::map<std::string, int> count;
  for (std::size_t i = 0; i < all->size(); ++i) {
    last[(*all)[i].serial] = i;
    ++count[(*all)[i].serial];
  }
  std::vector<core::RunResult> out;
  for (const std::string& s : serials) {
    auto it = last.find(s);
    if (it == last.end()) {
      if (problems) problems->push_back(s + ": tested, but no run of it is in the store");
      continue;
    }
    out.push_back(std::move((*all)[it->second]));
    if (runs_stored) runs_stored->push_back(count[s]);
  }
  return out;
}

}  // namespace echoline::score
