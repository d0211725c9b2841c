#include "daemon/client/run_table.hpp"

#include <algorithm>
#include <map>
#include <set>

#include <fmt/format.h>

#include "daemon/store/yield.hpp"

namespace echoline::client {

using nlohmann::json;

void mark_retests_on_other_benches(json& runs) {
  std::map<std::string, std::string> last_station;   // serial -> station of its latest finished run
  for (auto& r : runs) {
    const std::string serial = r.value("serial", ""), station = r.value("station", "");
    auto it = last_station.find(serial);
    if (it != last_station.end() && it->second != station) r["retest_other_bench"] = it->second;
    if (r.value("verdict", "") != "aborted") last_station[serial] = station;
  }
}

std::string run_table(const json& runs, bool with_serial) {
  std::set<std::string> stations;
  for (const auto& r : runs) stations.insert(r.value("station", ""));
  const bool by_station = stations.size() > 1;
  std::size_t serial_width = 6;   // "serial"
  for (const auto& r : runs) serial_width = std::max(serial_width, r.value("serial", "").size());
  auto serial_cell = [&](const std::string& text) { return with_serial ? fmt::format("{:<{}} ", text, serial_width) : ""; };
  std::string out = fmt::format("{:<24} {}{:<54} {:<12} {:<11} {:>10} {:>8}  {}{}\n", "time (UTC)", serial_cell("serial"),
                                "run id", "verdict", "class", "res. MHz", "depth dB", by_station ? "station  " : "",
                                "reason");
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
    std::string reason = r.value("reason", "");
    if (r.contains("retest_other_bench")) {
      reason = fmt::format("RETEST on another bench (before: {}){}{}", r.value("retest_other_bench", ""),
                           reason.empty() ? "" : "; ", reason);
    }
    out += fmt::format("{:<24} {}{:<54} {:<12} {:<11} {:>10} {:>8}  {}{}\n", r.value("started_utc", ""),
                       serial_cell(r.value("serial", "")), r.value("run_id", ""), r.value("verdict", ""), cls, res, depth,
                       by_station ? r.value("station", "") + "  " : "", reason);
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
