// Lot statistics for the report: final run per unit, verdict counts, Pareto, resonance spread, Cpk.
#include <algorithm>
#include <cmath>

#include "daemon/store/lot_report.hpp"
#include "daemon/store/yield.hpp"

namespace echoline::store {

std::vector<std::size_t> final_runs(const std::vector<core::RunResult>& runs) {
  // A finished (non-aborted) run always wins over an aborted one, as in yield.hpp.
  const auto later = [&](std::size_t a, std::size_t b) {   // is run a the better final run than b?
    const bool fa = runs[a].verdict != core::Verdict::aborted, fb = runs[b].verdict != core::Verdict::aborted;
    if (fa != fb) return fa;
    return runs[a].started_utc >= runs[b].started_utc;
  };
  std::map<std::string, std::size_t> last;
  for (std::size_t i = 0; i < runs.size(); ++i) {
    auto [it, fresh] = last.try_emplace(runs[i].serial, i);
    if (!fresh && later(i, it->second)) it->second = i;
  }
  std::vector<std::size_t> out;
  out.reserve(last.size());
  for (const auto& [serial, i] : last) out.push_back(i);
  return out;
}

double lot_final_yield(const std::vector<core::RunResult>& runs) {
  // The one definition of yield (yield.hpp), fed in run order.
  std::vector<std::size_t> order(runs.size());
  for (std::size_t i = 0; i < order.size(); ++i) order[i] = i;
  std::stable_sort(order.begin(), order.end(), [&](std::size_t a, std::size_t b) { return runs[a].started_utc < runs[b].started_utc; });
  std::vector<RunOutcome> rows;
  rows.reserve(runs.size());
  for (std::size_t i : order) {
    rows.push_back({"lot", runs[i].serial, core::to_string(runs[i].verdict), core::to_string(runs[i].failure_class)});
  }
  const auto y = summarize_yield(rows);
  return y.empty() ? 0.0 : y.front().final_yield;
}

// A resonance the statistics may use: the unit has a dip (not no-response) and its maximum lies
// strictly inside the sweep (a maximum on the first or last point only says "at or beyond").
static bool resonance_inside(const core::RunResult& r) {
  if (r.failure_class == core::FailureClass::no_response) return false;
  if (r.points.empty()) return true;
  const double f = *r.metrics.resonance_hz;
  return f > r.points.front().frequency_hz && f < r.points.back().frequency_hz;
}

LotStats compute_lot_stats(const std::vector<core::RunResult>& runs, const core::Limits& limits) {
  LotStats s;
  s.runs = static_cast<int>(runs.size());
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    s.runs_by_verdict[v] = 0;
    s.units_by_final_verdict[v] = 0;
  }
  for (const auto& r : runs) {
    ++s.runs_by_verdict[core::to_string(r.verdict)];
    if (s.first_started_utc.empty() || r.started_utc < s.first_started_utc) s.first_started_utc = r.started_utc;
    if (r.started_utc > s.last_started_utc) s.last_started_utc = r.started_utc;
  }
  std::map<std::string, int> classes;
  for (std::size_t i : final_runs(runs)) {
    const auto& r = runs[i];
    ++s.units;
    ++s.units_by_final_verdict[core::to_string(r.verdict)];
    if ((r.verdict == core::Verdict::fail || r.verdict == core::Verdict::inconclusive) &&
        r.failure_class != core::FailureClass::none) {
      ++classes[core::to_string(r.failure_class)];
    }
    if (r.metrics.resonance_hz && std::isfinite(*r.metrics.resonance_hz) && r.verdict != core::Verdict::aborted) {
      if (resonance_inside(r)) s.resonances_hz.push_back(*r.metrics.resonance_hz);
      else ++s.resonances_left_out;
    }
  }
  s.pareto.assign(classes.begin(), classes.end());
  std::stable_sort(s.pareto.begin(), s.pareto.end(), [](auto& a, auto& b) { return a.second > b.second; });
  s.final_yield = lot_final_yield(runs);
  const auto n = s.resonances_hz.size();
  if (n >= 1) {
    double sum = 0;
    for (double f : s.resonances_hz) sum += f;
    s.mean_hz = sum / static_cast<double>(n);
  }
  if (n >= 2) {
    double ss = 0;
    for (double f : s.resonances_hz) ss += (f - *s.mean_hz) * (f - *s.mean_hz);
    s.stddev_hz = std::sqrt(ss / static_cast<double>(n - 1));
    if (limits.resonance_min_hz && limits.resonance_max_hz && *s.stddev_hz > 0) {
      // Cpk = min(USL - mean, mean - LSL) / (3 sigma): common practice, no source.
      s.cpk = std::min(*limits.resonance_max_hz - *s.mean_hz, *s.mean_hz - *limits.resonance_min_hz) / (3 * *s.stddev_hz);
    }
  }
  return s;
}

}  // namespace echoline::store
