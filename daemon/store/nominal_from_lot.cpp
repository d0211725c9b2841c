// Nominal unit from a lot (nominal_from_lot.hpp).
#include "daemon/store/nominal_from_lot.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"
#include "daemon/store/lot_report.hpp"

namespace echoline::store {
namespace {

std::optional<double> median(std::vector<double> v) {
  if (v.empty()) return std::nullopt;
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2;
}

// The band reaches the sweep's first or last point: the unit's bandwidth is wider than measured.
bool band_clipped(const core::RunResult& r) {
  if (r.points.empty()) return false;
  const double first = r.points.front().frequency_hz, last = r.points.back().frequency_hz;
  return (r.metrics.band_low_hz && *r.metrics.band_low_hz <= first) ||
         (r.metrics.band_high_hz && *r.metrics.band_high_hz >= last);
}

}  // namespace

NominalFromLot nominal_from_lot(const std::vector<core::RunResult>& runs) {
  NominalFromLot out;
  std::vector<double> bw, depth, f0;
  for (std::size_t i : final_runs(runs)) {
    const core::RunResult& r = runs[i];
    if (r.verdict != core::Verdict::pass && r.verdict != core::Verdict::inconclusive) continue;
    ++out.units;
    if (r.metrics.bandwidth_hz && std::isfinite(*r.metrics.bandwidth_hz)) {
      if (band_clipped(r)) ++out.bandwidth_clipped;
      else bw.push_back(*r.metrics.bandwidth_hz);
    }
    if (std::isfinite(r.metrics.depth_db) && r.metrics.depth_db > 0) depth.push_back(r.metrics.depth_db);
    // A maximum on the sweep's first or last point is no resonance to spread (lot_stats.cpp).
    if (r.metrics.resonance_hz && std::isfinite(*r.metrics.resonance_hz) &&
        (r.points.empty() || (*r.metrics.resonance_hz > r.points.front().frequency_hz &&
                              *r.metrics.resonance_hz < r.points.back().frequency_hz))) {
      f0.push_back(*r.metrics.resonance_hz);
    }
  }
  out.bandwidth_hz = median(bw);
  out.depth_db = median(depth);
  if (f0.size() >= 2) {
    double mean = 0;
    for (double f : f0) mean += f;
    mean /= static_cast<double>(f0.size());
    double ss = 0;
    for (double f : f0) ss += (f - mean) * (f - mean);
    out.resonance_sd_hz = std::sqrt(ss / static_cast<double>(f0.size() - 1));
  }
  std::vector<std::string> parts;
  if (out.bandwidth_hz) parts.push_back(fmt::format("\"bandwidth_hz\": \"{}\"", core::format_frequency(*out.bandwidth_hz, 2)));
  // The recipe loader takes a depth of 1 to 80 dB: a deeper median is given as 80 (a deep dip).
  if (out.depth_db) parts.push_back(fmt::format("\"depth_db\": {:.1f}", std::clamp(*out.depth_db, 1.0, 80.0)));
  if (out.resonance_sd_hz) parts.push_back(fmt::format("\"resonance_sd_hz\": \"{}\"", core::format_frequency(*out.resonance_sd_hz, 2)));
  if (!parts.empty()) {
    std::string body;
    for (const auto& p : parts) body += (body.empty() ? "" : ", ") + p;
    out.snippet = "\"nominal_unit\": { " + body + " }";
  }
  return out;
}

}  // namespace echoline::store
