// /metrics: the station's numbers in the OpenMetrics text format (OpenMetrics 1.0): runs by
// verdict and failure class from the store, a histogram of cycle times, calibration age and
// state, instrument errors, reconnects and health, the forwarding outbox's depth.
// CycleHistogram is thread-safe; rendering is a pure function of its inputs.
#pragma once

#include <array>
#include <cstdint>
#include <mutex>
#include <string>

#include <nlohmann/json.hpp>

#include "daemon/store/run_store.hpp"

namespace echoline::web {

// Upper bounds (s) of the cycle-time buckets; +Inf follows.
inline constexpr std::array<double, 10> kCycleBuckets = {0.05, 0.1, 0.25, 0.5, 1, 2, 3, 5, 10, 30};

struct CycleSnapshot {
  std::array<std::uint64_t, kCycleBuckets.size() + 1> counts{};   // per bucket, not cumulative; last = above all
  std::uint64_t count = 0;
  double sum_s = 0;
  double created_unix_s = 0;
};

// Cycle times (a test's start to its verdict) of the tests this daemon ran since it started.
class CycleHistogram {
 public:
  explicit CycleHistogram(double created_unix_s);
  void observe(double seconds);
  CycleSnapshot snapshot() const;

 private:
  mutable std::mutex mu_;
  CycleSnapshot s_;
};

struct MetricsInput {
  std::string station;
  store::YieldSummary yield;     // this station's runs (station_yield)
  nlohmann::json status;         // the API's status result (instruments, calibration, forwarding, busy)
  CycleSnapshot cycles;
  double now_unix_s = 0;
};

// This station's yield for /metrics (every run the store holds under `station`): counted once,
// then kept by the store as runs commit (store::RunStore::live_yield), so a scrape costs O(1).
Result<store::YieldSummary> station_yield(store::RunStore& store, const std::string& station);

// The exposition, ending in "# EOF\n". Media type: kOpenMetricsType.
std::string render_openmetrics(const MetricsInput& in);
inline constexpr const char* kOpenMetricsType = "application/openmetrics-text; version=1.0.0; charset=utf-8";

// A label value escaped for the exposition (backslash, double quote, newline).
std::string escape_label(const std::string& value);

}  // namespace echoline::web
