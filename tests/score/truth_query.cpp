// Ground truth for a scored run (truth_query.hpp).
#include "tests/score/truth_query.hpp"

#include <cmath>
#include <limits>
#include <stdexcept>

#include <nlohmann/json.hpp>

namespace echoline::score {

std::vector<double> segment_grid(const core::LimitSegment& segment, double step_hz) {
  std::vector<double> f;
  const double span = segment.stop_hz - segment.start_hz;
  const long n = std::lround(std::floor(span / step_hz + 1e-9));
  for (long i = 0; i <= n; ++i) f.push_back(segment.start_hz + static_cast<double>(i) * step_hz);
  if (f.empty() || segment.stop_hz - f.back() > 1.0) f.push_back(segment.stop_hz);
  return f;
}

MaskTruth judge_segment(const core::LimitSegment& segment, const std::vector<double>& frequencies_hz,
                        const std::vector<double>& rl_db) {
  MaskTruth m;
  m.segment = segment;
  for (std::size_t i = 0; i < frequencies_hz.size() && i < rl_db.size(); ++i) {
    const double f = frequencies_hz[i];
    if (f < segment.start_hz - 1e-3 || f > segment.stop_hz + 1e-3) continue;
    ++m.grid_points;
    // NaN cannot occur (the query maps null to +inf); a NaN would count as a miss.
    if (!(rl_db[i] >= segment.min_return_loss_db)) m.met = false;
    if (!(rl_db[i] >= m.lowest_rl_db)) {
      m.lowest_rl_db = rl_db[i];
      m.lowest_at_hz = f;
    }
  }
  return m;
}

UnitTruth query_truth(soak::StationUnderTest& station, const std::string& serial,
                      const std::vector<double>& run_frequencies_hz, const core::Recipe& recipe) {
  std::vector<double> ask = run_frequencies_hz;
  std::vector<std::pair<std::size_t, std::size_t>> ranges;   // each segment's slice of `ask`
  for (const core::LimitSegment& s : recipe.limits.mask) {
    const auto grid = segment_grid(s);
    ranges.emplace_back(ask.size(), grid.size());
    ask.insert(ask.end(), grid.begin(), grid.end());
  }
  const nlohmann::json t = station.truth(serial, ask);
  const nlohmann::json& rl = t.at("return_loss_db");
  if (!rl.is_array() || rl.size() != ask.size()) {
    throw std::runtime_error("truth for " + serial + ": " + std::to_string(ask.size()) + " frequencies asked, " +
                             std::to_string(rl.is_array() ? rl.size() : 0) + " values returned");
  }
  std::vector<double> values;
  values.reserve(rl.size());
  for (const auto& v : rl) values.push_back(v.is_number() ? v.get<double>() : std::numeric_limits<double>::infinity());

  UnitTruth u;
  u.defect = t.value("defect", "");
  u.model = t.value("model", "");
  u.f0_hz = t.value("f0_hz", 0.0);
  if (t.contains("depth_db") && t["depth_db"].is_number()) u.depth_db = t["depth_db"].get<double>();
  u.element_length_mm = t.value("element_length_mm", 0.0);
  u.nominal_length_mm = t.value("nominal_length_mm", 0.0);
  u.rl_at_points_db.assign(values.begin(), values.begin() + static_cast<long>(run_frequencies_hz.size()));
  for (std::size_t k = 0; k < recipe.limits.mask.size(); ++k) {
    const auto [first, count] = ranges[k];
    const std::vector<double> f(ask.begin() + static_cast<long>(first), ask.begin() + static_cast<long>(first + count));
    const std::vector<double> r(values.begin() + static_cast<long>(first),
                                values.begin() + static_cast<long>(first + count));
    u.mask.push_back(judge_segment(recipe.limits.mask[k], f, r));
  }
  return u;
}

}  // namespace echoline::score
