// Ground-truth scoring of stored runs (truth_check.hpp).
#include "tests/soak/truth_check.hpp"

#include <cmath>

#include <fmt/format.h>

namespace echoline::soak {

TruthLimits limits_of(const core::Recipe& recipe) {
  TruthLimits l;
  for (const core::LimitSegment& s : recipe.limits.mask) l.mask.push_back({s.start_hz, s.stop_hz, s.min_return_loss_db});
  l.resonance_min_hz = recipe.limits.resonance_min_hz;
  l.resonance_max_hz = recipe.limits.resonance_max_hz;
  return l;
}

bool truth_accepts(const std::vector<double>& frequencies_hz, const std::vector<double>& true_rl_db, double true_f0_hz,
                   const TruthLimits& limits, std::string* reason) {
  for (const MaskLimit& m : limits.mask) {
    for (std::size_t i = 0; i < frequencies_hz.size() && i < true_rl_db.size(); ++i) {
      const double f = frequencies_hz[i];
      if (f < m.start_hz || f > m.stop_hz) continue;
      // A NaN truth (no finite value) is scored as a miss: the unit is not known to be good.
      if (!(true_rl_db[i] >= m.min_rl_db)) {
        if (reason) *reason = fmt::format("true return loss {:.2f} dB at {:.3f} MHz is below {} dB", true_rl_db[i], f / 1e6,
                                          m.min_rl_db);
        return false;
      }
    }
  }
  if (limits.resonance_min_hz && limits.resonance_max_hz &&
      !(true_f0_hz >= *limits.resonance_min_hz && true_f0_hz <= *limits.resonance_max_hz)) {
    if (reason) *reason = fmt::format("true resonance {:.3f} MHz outside {:.0f}-{:.0f} MHz", true_f0_hz / 1e6,
                                      *limits.resonance_min_hz / 1e6, *limits.resonance_max_hz / 1e6);
    return false;
  }
  return true;
}

std::optional<double> rms_misfit_db(const std::vector<StoredPoint>& run, const std::vector<double>& true_rl_db,
                                    double max_rl_db) {
  double sum = 0;
  int n = 0;
  for (std::size_t i = 0; i < run.size() && i < true_rl_db.size(); ++i) {
    const double truth = true_rl_db[i];
    if (!std::isfinite(truth) || truth > max_rl_db || !std::isfinite(run[i].rl_db)) continue;
    const double d = run[i].rl_db - truth;
    sum += d * d;
    ++n;
  }
  if (n == 0) return std::nullopt;
  return std::sqrt(sum / n);
}

double fraction_outside_bounds(const std::vector<StoredPoint>& run, const std::vector<double>& true_rl_db,
                               double slack_db, double max_rl_db) {
  int n = 0, outside = 0;
  for (std::size_t i = 0; i < run.size() && i < true_rl_db.size(); ++i) {
    const double truth = true_rl_db[i];
    if (!std::isfinite(truth) || truth > max_rl_db) continue;
    ++n;
    const double lo = std::isfinite(run[i].rl_worst_db) ? run[i].rl_worst_db : run[i].rl_db;
    const double hi = std::isnan(run[i].rl_best_db) ? run[i].rl_db : run[i].rl_best_db;   // +inf = unbounded
    if (truth < lo - slack_db || truth > hi + slack_db) ++outside;
  }
  return n == 0 ? 0.0 : static_cast<double>(outside) / n;
}

}  // namespace echoline::soak
