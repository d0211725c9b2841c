// lot.summary: yield, Pareto, resonance histogram and last units of one lot, as JSON.
#include "daemon/service/lot_summary.hpp"

#include <algorithm>
#include <cmath>

#include "daemon/store/lot_report.hpp"

namespace echoline::service {
namespace {

using nlohmann::json;

json yield_json(const std::optional<store::YieldSummary>& y) {
  store::YieldSummary s;
  if (y) s = *y;
  json by_verdict = json::object();
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) by_verdict[v] = 0;
  for (const auto& [v, n] : s.runs_by_verdict) by_verdict[v] = n;
  return {{"runs", s.runs},
          {"runs_by_verdict", by_verdict},
          {"runs_by_class", s.runs_by_class},
          {"units_tested", s.units_tested},
          {"units_first_pass", s.units_first_pass},
          {"units_final_pass", s.units_final_pass},
          {"first_pass_yield", s.first_pass_yield},
          {"final_yield", s.final_yield}};
}

// Equal-width bins over the resonances and the window (when the recipe has one).
json histogram_json(const store::LotStats& st, const core::Limits& limits) {
  json h = {{"bins", json::array()}, {"count", st.resonances_hz.size()}, {"left_out", st.resonances_left_out}};
  h["mean_hz"] = st.mean_hz ? json(*st.mean_hz) : json(nullptr);
  h["stddev_hz"] = st.stddev_hz ? json(*st.stddev_hz) : json(nullptr);
  h["cpk"] = st.cpk ? json(*st.cpk) : json(nullptr);
  h["window_low_hz"] = limits.resonance_min_hz ? json(*limits.resonance_min_hz) : json(nullptr);
  h["window_high_hz"] = limits.resonance_max_hz ? json(*limits.resonance_max_hz) : json(nullptr);
  if (st.resonances_hz.empty()) return h;
  double lo = *std::min_element(st.resonances_hz.begin(), st.resonances_hz.end());
  double hi = *std::max_element(st.resonances_hz.begin(), st.resonances_hz.end());
  if (limits.resonance_min_hz) lo = std::min(lo, *limits.resonance_min_hz);
  if (limits.resonance_max_hz) hi = std::max(hi, *limits.resonance_max_hz);
  if (hi - lo < 1e6) {
    lo -= 0.5e6;
    hi += 0.5e6;
  }
  const double width = (hi - lo) / kResonanceBins;
  std::vector<int> counts(kResonanceBins, 0);
  for (double f : st.resonances_hz) {
    ++counts[static_cast<std::size_t>(std::clamp(static_cast<int>((f - lo) / width), 0, kResonanceBins - 1))];
  }
  for (int b = 0; b < kResonanceBins; ++b) {
    h["bins"].push_back({{"low_hz", lo + b * width}, {"high_hz", lo + (b + 1) * width}, {"count", counts[static_cast<std::size_t>(b)]}});
  }
  return h;
}

json unit_row(const core::RunResult& r) {
  return {{"run_id", r.run_id},
          {"serial", r.serial},
          {"verdict", core::to_string(r.verdict)},
          {"failure_class", core::to_string(r.failure_class)},
          {"reason", r.reason},
          {"retest", r.retest},
          {"started_utc", r.started_utc},
          {"resonance_hz", r.metrics.resonance_hz ? json(*r.metrics.resonance_hz) : json(nullptr)}};
}

}  // namespace

json lot_summary_json(const std::string& lot, const std::vector<core::RunResult>& runs,
                      const std::optional<store::YieldSummary>& yield, const core::Limits& limits) {
  const store::LotStats st = store::compute_lot_stats(runs, limits);
  json pareto = json::array();
  for (const auto& [cls, n] : st.pareto) pareto.push_back({{"failure_class", cls}, {"units", n}});
  json last = json::array();
  const std::size_t first = runs.size() > kLastUnitsShown ? runs.size() - kLastUnitsShown : 0;
  for (std::size_t i = runs.size(); i > first; --i) last.push_back(unit_row(runs[i - 1]));
  return {{"lot", lot},
          {"yield", yield_json(yield)},
          {"units_by_final_verdict", st.units_by_final_verdict},
          {"pareto", pareto},
          {"resonance", histogram_json(st, limits)},
          {"first_started_utc", st.first_started_utc},
          {"last_started_utc", st.last_started_utc},
          {"last_runs", last}};
}

Result<json> lot_summary(store::RunStore& store, std::string lot, const core::Limits& limits) {
  if (lot.empty()) {
    auto latest = store.latest_lot();
    if (!latest) return latest.error();
    lot = latest->value_or("");
  }
  if (lot.empty()) return lot_summary_json("", {}, std::nullopt, limits);
  auto runs = store.lot_runs(lot, false);
  if (!runs) return runs.error();
  auto yields = store.yield_by(store::YieldGroup::lot, lot);
  if (!yields) return yields.error();
  std::optional<store::YieldSummary> y;
  if (!yields->empty()) y = yields->front();
  return lot_summary_json(lot, *runs, y, limits);
}

}  // namespace echoline::service
