// Yield and means per station, operator and calibration; each station against the others.
#include "daemon/store/station_compare.hpp"

#include <cmath>
#include <functional>
#include <map>
#include <set>

namespace echoline::store {
namespace {

struct Acc {
  std::set<std::string> units;
  int finished = 0, passed = 0, retests = 0;
  std::vector<double> res, depth;
};

MeanOf mean_of(const std::vector<double>& v) {
  MeanOf m;
  m.n = static_cast<int>(v.size());
  if (v.empty()) return m;
  double sum = 0;
  for (double x : v) sum += x;
  m.mean = sum / m.n;
  if (m.n >= 2) {
    double ss = 0;
    for (double x : v) ss += (x - *m.mean) * (x - *m.mean);
    m.sd = std::sqrt(ss / (m.n - 1));
  }
  return m;
}

// Difference of means and its z (Welch standard error); nullopt without two values each side.
void difference(const std::vector<double>& a, const std::vector<double>& b, std::optional<double>& diff,
                std::optional<double>& z) {
  const MeanOf ma = mean_of(a), mb = mean_of(b);
  if (!ma.mean || !mb.mean) return;
  diff = *ma.mean - *mb.mean;
  if (!ma.sd || !mb.sd) return;
  const double se = std::sqrt(*ma.sd * *ma.sd / ma.n + *mb.sd * *mb.sd / mb.n);
  if (se > 0) z = *diff / se;
}

std::vector<GroupYield> finish(const std::map<std::string, Acc>& groups) {
  std::vector<GroupYield> out;
  for (const auto& [key, a] : groups) {
    GroupYield g;
    g.key = key;
    g.units = static_cast<int>(a.units.size());
    g.finished_runs = a.finished;
    g.passed_runs = a.passed;
    g.run_yield = a.finished ? static_cast<double>(a.passed) / a.finished : 0;
    g.retests_other_bench = a.retests;
    g.resonance_hz = mean_of(a.res);
    g.depth_db = mean_of(a.depth);
    out.push_back(std::move(g));
  }
  return out;
}

}  // namespace

StationComparison compare_stations(const std::vector<core::RunResult>& runs) {
  std::map<std::string, Acc> station, op, cal;
  std::map<std::string, std::string> first_station;   // serial -> station of its first finished run
  for (const auto& r : runs) {
    if (r.verdict == core::Verdict::aborted) continue;
    bool other_bench = false;
    auto [it, first] = first_station.emplace(r.serial, r.station);
    if (!first && it->second != r.station) other_bench = true;
    for (auto* group : {&station[r.station], &op[r.operator_name], &cal[r.calibration_id.empty() ? "(none)" : r.calibration_id]}) {
      group->units.insert(r.serial);
      ++group->finished;
      if (r.verdict == core::Verdict::pass) ++group->passed;
      if (other_bench) ++group->retests;
      if (r.metrics.resonance_hz && std::isfinite(*r.metrics.resonance_hz)) {
        group->res.push_back(*r.metrics.resonance_hz);
        if (std::isfinite(r.metrics.depth_db)) group->depth.push_back(r.metrics.depth_db);
      }
    }
  }
  StationComparison c;
  c.by_station = finish(station);
  c.by_operator = finish(op);
  c.by_calibration = finish(cal);
  for (auto& g : c.by_station) {
    std::vector<double> res_rest, depth_rest;
    for (const auto& [key, a] : station) {
      if (key == g.key) continue;
      res_rest.insert(res_rest.end(), a.res.begin(), a.res.end());
      depth_rest.insert(depth_rest.end(), a.depth.begin(), a.depth.end());
    }
    if (res_rest.empty()) continue;
    difference(station.at(g.key).res, res_rest, g.resonance_diff_hz, g.resonance_z);
    difference(station.at(g.key).depth, depth_rest, g.depth_diff_db, g.depth_z);
    g.stands_out = (g.resonance_z && std::abs(*g.resonance_z) > 3) || (g.depth_z && std::abs(*g.depth_z) > 3);
  }
  return c;
}

}  // namespace echoline::store
