// Names of verdicts and failure classes as users, the store and the API see them; a stored run's
// raw readings for judging it again.
#include "daemon/core/run_result.hpp"

#include <cmath>

namespace echoline::core {

const char* to_string(Verdict v) {
  switch (v) {
    case Verdict::pass: return "pass";
    case Verdict::fail: return "fail";
    case Verdict::inconclusive: return "inconclusive";
    case Verdict::aborted: return "aborted";
  }
  return "aborted";
}

const char* to_string(FailureClass c) {
  switch (c) {
    case FailureClass::none: return "";
    case FailureClass::no_response: return "no-response";
    case FailureClass::tuned_low: return "tuned-low";
    case FailureClass::tuned_high: return "tuned-high";
    case FailureClass::shallow: return "shallow";
    case FailureClass::out_of_mask: return "out-of-mask";
  }
  return "";
}

std::vector<Reading> direct_readings(const RunResult& run) {
  std::vector<Reading> out;
  out.reserve(run.points.size());
  for (const PointResult& p : run.points) out.push_back({p.frequency_hz, p.raw_dbm});
  return out;
}

std::vector<Reading> offset_readings(const RunResult& run) {
  std::vector<Reading> out;
  out.reserve(run.points.size());
  for (const PointResult& p : run.points) {
    if (!std::isfinite(p.offset_raw_dbm)) return {};
    out.push_back({p.frequency_hz, p.offset_raw_dbm});
  }
  return out;
}

}  // namespace echoline::core
