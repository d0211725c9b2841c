#include "daemon/client/run_table.hpp"

#include <map>
#include <set>

#include <fmt/format.h>

#include "daemon/store/yield.hpp"

namespace echoline::client {

using nlohmann::json;

std::string run_table(const json& runs) {
  std::string out = fmt::format("{:<24} {:<40} {:<12} {:<11} {:>10} {:>8}  {}\n", "time (UTC)", "run id", "verdict",
                                "class", "res. MHz", "depth dB", "reason");
  for (const auto& r : runs) {
    const json m = r.contains("metrics") && r["metrics"].is_object() ? r["metrics"] : json::object();
    const auto res = m.contains("resonance_hz") && m["resonance_hz"].is_number()
                         ? fmt::format("{:.2f}", m["resonance_hz"].get<double>() / 1e6)
                         : std::string("-");
    const auto depth = m.contains("depth_db") && m["depth_db"].is_number() && r.value("verdict", "") != "aborted"
                           ? fmt::format("{:.1f}", m["depth_db"].get<double>())
                           : std::string("-");
    std::string cls = r.value("failure_class", "");
    if (cls.empty()) cls = "-";
    out += fmt::format("{:<24} {:<40} {:<12} {:<11} {:>10} {:>8}  {}\n", r.value("started_utc", ""),
                       r.value("run_id", ""), r.value("verdict", ""), cls, res, depth, r.value("reason", ""));
  }
  return out;
}

LotYield lot_yield(const json& runs) {
  std::vector<store::RunOutcome> rows;
  std::set<std::string> serials;
  for (const auto& r : runs) {
    rows.push_back({"lot", r.value("serial", ""), r.value("verdict", ""), r.value("failure_class", "")});
    serials.insert(r.value("serial", ""));
  }
  const auto summary = store::summarize_yield(rows);   // the one definition of yield
  LotYield y;
  y.units = static_cast<int>(serials.size());
  if (!summary.empty()) {
    y.judged = summary.front().units_tested;
    y.passed = summary.front().units_final_pass;
    y.yield = summary.front().final_yield;
  }
  return y;
}

}  // namespace echoline::client
