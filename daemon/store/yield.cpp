// First-pass yield: a unit's first finished run passed. Final yield: its latest finished run passed.
// Aborted runs count in the per-verdict totals but are not test outcomes for yield.
#include "daemon/store/yield.hpp"

#include <map>

namespace echoline::store {

std::vector<YieldSummary> summarize_yield(const std::vector<RunOutcome>& rows) {
  struct UnitState { std::string first, last; };
  std::vector<YieldSummary> out;
  std::map<std::string, std::size_t> index;
  std::map<std::string, std::map<std::string, UnitState>> units;  // group -> serial -> outcomes
  for (const auto& r : rows) {
    auto [it, fresh] = index.try_emplace(r.group, out.size());
    if (fresh) {
      YieldSummary y;
      y.group = r.group;
      for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) y.runs_by_verdict[v] = 0;
      out.push_back(std::move(y));
    }
    YieldSummary& y = out[it->second];
    ++y.runs;
    ++y.runs_by_verdict[r.verdict];
    if (!r.failure_class.empty()) ++y.runs_by_class[r.failure_class];
    if (r.verdict == "aborted") continue;
    auto& u = units[r.group][r.serial];
    if (u.first.empty()) u.first = r.verdict;
    u.last = r.verdict;
  }
  for (auto& y : out) {
    for (const auto& [serial, u] : units[y.group]) {
      ++y.units_tested;
      if (u.first == "pass") ++y.units_first_pass;
      if (u.last == "pass") ++y.units_final_pass;
    }
    if (y.units_tested > 0) {
      y.first_pass_yield = static_cast<double>(y.units_first_pass) / y.units_tested;
      y.final_yield = static_cast<double>(y.units_final_pass) / y.units_tested;
    }
  }
  return out;
}

void add_yield(YieldSummary& total, const YieldSummary& part, int sign) {
  total.runs += sign * part.runs;
  for (const auto& [verdict, n] : part.runs_by_verdict) total.runs_by_verdict[verdict] += sign * n;
  for (const auto& [cls, n] : part.runs_by_class) {
    auto it = total.runs_by_class.try_emplace(cls, 0).first;
    it->second += sign * n;
    if (it->second == 0) total.runs_by_class.erase(it);
  }
  total.units_tested += sign * part.units_tested;
  total.units_first_pass += sign * part.units_first_pass;
  total.units_final_pass += sign * part.units_final_pass;
  total.first_pass_yield = total.units_tested > 0 ? static_cast<double>(total.units_first_pass) / total.units_tested : 0;
  total.final_yield = total.units_tested > 0 ? static_cast<double>(total.units_final_pass) / total.units_tested : 0;
}

}  // namespace echoline::store
