// The offset pair per plan point (offset_pair_points.hpp).
#include "daemon/core/offset_pair_points.hpp"

#include <algorithm>
#include <cmath>

#include "daemon/core/uncertainty.hpp"

namespace echoline::core {

std::vector<OffsetPairInterval> offset_pair_intervals(const UncertaintyBudget& b, const std::vector<double>& reference_dbm,
                                                      const std::vector<Reading>& direct,
                                                      const std::vector<Reading>& offset,
                                                      const UncertaintyBudget* leakage) {
  std::vector<OffsetPairInterval> out(direct.size());
  if (!b.offset_line) return out;
  const UncertaintyBudget& lb = leakage ? *leakage : b;
  for (std::size_t i = 0; i < direct.size() && i < offset.size() && i < reference_dbm.size(); ++i) {
    if (!std::isfinite(direct[i].raw_dbm) || !std::isfinite(offset[i].raw_dbm)) continue;
    OffsetPairPoint p;
    p.frequency_hz = direct[i].frequency_hz;
    p.p_direct = std::pow(10.0, (direct[i].raw_dbm - reference_dbm[i]) / 10);
    p.p_offset = std::pow(10.0, (offset[i].raw_dbm - reference_dbm[i]) / 10);
    p.reference_low_db = b.reference_error_low_db[i];
    p.reference_high_db = b.reference_error_high_db[i];
    p.reference_sigma_db = b.reference_noise_db[i];
    p.sigma_direct_db = reading_sigma_db(b, i, direct[i].raw_dbm);
    p.sigma_offset_db = reading_sigma_db(b, i, offset[i].raw_dbm);
    p.coverage_factor = b.coverage_factor;
    // The leakage from the LOAD reading (MEASUREMENT.md §3.1), both ends: the reading
    // |E_D + Γ_L'| at its low end (reference error and noise at the coverage factor) less the
    // kit's LOAD residual and the LOAD's connection through the source match. 0 when the
    // budget holds no LOAD reading, or for a fast capture (its offset terms are not taken here).
    p.directivity_high = lb.directivity_bound[i];
    p.directivity_low = 0;
    if (lb.frequency_offset_hz == 0 && i < lb.directivity_measured.size() && i < lb.load_residual.size() &&
        lb.directivity_measured[i] > 0) {
      const double load_rel_db = 20 * std::log10(lb.directivity_measured[i]);
      const double s_load = reading_sigma_db(lb, i, reference_dbm[i] + load_rel_db);
      const double u_load = std::hypot(s_load, lb.reference_noise_db[i]);
      const double reading_low =
          std::pow(10.0, (load_rel_db + lb.reference_error_low_db[i] - lb.coverage_factor * u_load) / 20);
      // The LOAD's residual and its connection through the source match (3.1, 3.3).
      const double l = lb.load_residual[i] + lb.coverage_factor * lb.connection;
      const double residual = lb.source_match * l < 1 ? l / (1 - lb.source_match * l) : 1.0;
      p.directivity_low = std::clamp(reading_low - residual, 0.0, p.directivity_high);
    }
    p.source_match = b.source_match;
    p.connection = b.coverage_factor * b.connection;
    out[i] = combine_offset_pair(p, *b.offset_line);
  }
  return out;
}

}  // namespace echoline::core
