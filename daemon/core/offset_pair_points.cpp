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

PairSumTrace offset_pair_sum(const UncertaintyBudget& b, const std::vector<double>& reference_dbm,
                             const std::vector<Reading>& direct, const std::vector<Reading>& offset,
                             const std::vector<OffsetPairInterval>& pair, const UncertaintyBudget* leakage) {
  PairSumTrace t;
  if (!b.offset_line) return t;
  const UncertaintyBudget& lb = leakage ? *leakage : b;
  const OffsetLine& line = *b.offset_line;
  const double x_hat = 1 / std::min(1.0, std::pow(10.0, -line.loss_db / 10));
  const double w = x_hat / (1 + x_hat);
  const double to_rel = std::log(10.0) / 10;   // σ in dB to relative σ of a power
  const std::size_t n = direct.size();
  const bool have_load = lb.frequency_offset_hz == 0 && lb.directivity_measured.size() >= n && lb.load_residual.size() >= n;
  t.nuisance.line = line;
  t.nuisance.source_match = b.source_match;
  t.nuisance.connection = b.coverage_factor * b.connection;
  t.nuisance.error_delay_s = b.error_delay_s;
  t.nuisance.load_subtracted = have_load;
  t.coverage_factor = b.coverage_factor;
  for (std::size_t i = 0; i < n && i < offset.size() && i < reference_dbm.size() && i < pair.size(); ++i) {
    const double p_a = std::pow(10.0, (direct[i].raw_dbm - reference_dbm[i]) / 10);
    const double p_b = std::pow(10.0, (offset[i].raw_dbm - reference_dbm[i]) / 10);
    double l = 0, e_l = 0, r_l = 0;
    if (have_load) {
      l = lb.directivity_measured[i] * lb.directivity_measured[i];
      e_l = l > 0 ? reading_sigma_db(lb, i, reference_dbm[i] + 10 * std::log10(l)) * to_rel : 0;
      const double lr = lb.load_residual[i] + lb.coverage_factor * lb.connection;
      r_l = lb.source_match * lr < 1 ? lr / (1 - lb.source_match * lr) : 1.0;
    }
    const double y = w * ((p_a - l) + x_hat * (p_b - l));
    const double e_a = reading_sigma_db(b, i, direct[i].raw_dbm) * to_rel;
    const double e_b = reading_sigma_db(b, i, offset[i].raw_dbm) * to_rel;
    const double e_r = b.reference_noise_db[i] * to_rel;   // the reference scales all three alike
    t.frequency_hz.push_back(direct[i].frequency_hz);
    t.y.push_back(y);
    t.sigma_y.push_back(w * std::sqrt(std::pow(p_a * e_a, 2) + std::pow(x_hat * p_b * e_b, 2) +
                                      std::pow((1 + x_hat) * l * e_l, 2)) +
                        std::fabs(y) * e_r);
    t.leakage.push_back(lb.directivity_bound[i]);
    t.load_residual.push_back(r_l);
    t.turn_error_rad.push_back(pair[i].turn_error_rad);
    t.usable.push_back(pair[i].usable && std::isfinite(y) && std::isfinite(t.sigma_y.back()));
    const double hi = std::pow(10.0, b.reference_error_high_db[i] / 10) - 1;
    const double lo = 1 - std::pow(10.0, b.reference_error_low_db[i] / 10);
    t.nuisance.reference_ratio = std::max({t.nuisance.reference_ratio, std::fabs(hi), std::fabs(lo)});
    cover_reference_turning(t.nuisance, b.reference_error_low_db[i], b.reference_error_high_db[i],
                            lb.directivity_bound[i], b.source_match);
  }
  return t;
}

bool offset_reading_is_direct(const UncertaintyBudget& b, const std::vector<Reading>& direct,
                              const std::vector<Reading>& offset, double* rms_db, double* noise_db) {
  double z2 = 0, d2 = 0, s2 = 0;
  std::size_t n = 0;
  for (std::size_t i = 0; i < direct.size() && i < offset.size(); ++i) {
    if (!std::isfinite(direct[i].raw_dbm) || !std::isfinite(offset[i].raw_dbm)) continue;
    const double sa = reading_sigma_db(b, i, direct[i].raw_dbm), sb = reading_sigma_db(b, i, offset[i].raw_dbm);
    // A noiseless bench (no noise measured): a floor of 1 µdB, so equal readings count as equal.
    const double var = std::max(sa * sa + sb * sb, 1e-12), diff = offset[i].raw_dbm - direct[i].raw_dbm;
    z2 += diff * diff / var;
    d2 += diff * diff;
    s2 += var;
    ++n;
  }
  if (n == 0) return false;
  if (rms_db) *rms_db = std::sqrt(d2 / static_cast<double>(n));
  if (noise_db) *noise_db = std::sqrt(s2 / static_cast<double>(n));
  return z2 / static_cast<double>(n) <= kSameReadingMeanSquare;
}

}  // namespace echoline::core
