// The directivity phase from the calibration (directivity_phase.hpp). MEASUREMENT.md, "The
// directivity phase": with w_x = d/Γ_x + E_S·Γ_x, to first order
//   ln p_O − ln p_S = 2·ln(|Γ_O|/|Γ_S|) + 2·Re(d·(1/Γ_O − 1/Γ_S)) + 2·Re(E_S·(Γ_O − Γ_S)),
// and P in dB is 10·log10(p) = 4.343·ln p, so Re(d·A) = (P_O − P_S)/17.37 − ½·ln(|Γ_O|/|Γ_S|)
// − Re(E_S·B), A = (1/Γ_O − 1/Γ_S)/2 ≈ 1, B = (Γ_O − Γ_S)/2 ≈ 1. The second-order terms cancel
// between OPEN and SHORT (both hold (d + E_S)²), so the first-order form is good to |w|³.
#include "daemon/core/directivity_phase.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <numbers>

#include "daemon/core/uncertainty.hpp"

namespace echoline::core {

DirectivityPhase recover_directivity_phase(const CalibrationRecord& cal, const CalKit& kit) {
  DirectivityPhase out;
  const auto open = cal.traces.find("OPEN");
  const auto shrt = cal.traces.find("SHORT");
  const auto load = cal.traces.find("LOAD");
  const UncertaintyBudget& b = cal.budget;
  const std::size_t n = b.frequency_hz.size();
  const bool have = open != cal.traces.end() && shrt != cal.traces.end() && load != cal.traces.end() &&
                    open->second.size() == n && shrt->second.size() == n && load->second.size() == n &&
                    cal.reference_dbm.size() == n;
  constexpr double kDbPerNeperPower = 10.0 / 2.302585092994046;  // 10·log10(e): dB per neper of power
  const double k = b.coverage_factor;
  std::vector<double> widths;
  for (std::size_t i = 0; have && i < n; ++i) {
    const double f = b.frequency_hz[i];
    const std::complex<double> go = open_gamma(kit.open, f), gs = short_gamma(kit.short_, f);
    const std::complex<double> a = 0.5 * (1.0 / go - 1.0 / gs), bb = 0.5 * (go - gs);
    const double po = open->second[i].raw_dbm, ps = shrt->second[i].raw_dbm;
    // Re(d·A) (per unit |A|, so the cosine below is that of arg(d·A)).
    const double x = (po - ps) / (4 * kDbPerNeperPower);
    const double loss = 0.5 * -std::log(std::min(kit.open.min_magnitude, kit.short_.min_magnitude));
    const double sm = b.source_match * std::abs(bb);
    const double e_max = b.directivity_bound[i];
    const double kit_phase = 0.5 * e_max * (kit.open.phase_tolerance_rad + kit.short_.phase_tolerance_rad);
    // Noise of the difference of two readings at the full-reflection level, at the coverage factor.
    const double sigma = reading_sigma_db(b, i, po);
    const double noise = k * std::sqrt(2.0) * sigma / (4 * kDbPerNeperPower);
    const double h = sm + loss + kit_phase + noise;
    // |d| from the LOAD relative to the reference, give or take the LOAD's own residual, the
    // reference's error and the reading noise; the upper end is the budget's directivity bound.
    const double s_load = reading_sigma_db(b, i, load->second[i].raw_dbm);
    const double u = k * std::sqrt(s_load * s_load + b.reference_noise_db[i] * b.reference_noise_db[i]);
    const double dm = std::pow(10.0, (load->second[i].raw_dbm - cal.reference_dbm[i] - b.reference_error_high_db[i] - u) / 20);
    const double d_lo = std::max(0.0, dm - b.load_residual[i]), d_hi = b.directivity_bound[i];
    const double mag_a = std::abs(a);
    double c_lo = -1, c_hi = 1;
    if (d_lo > 0) {
      // cos = Re(d·A)/(|d||A|): the extremes over |d| in [d_lo, d_hi] and Re in [x − h, x + h].
      const double r_lo = x - h, r_hi = x + h;
      c_lo = std::max(-1.0, std::min(r_lo / (d_lo * mag_a), r_lo / (d_hi * mag_a)));
      c_hi = std::min(1.0, std::max(r_hi / (d_lo * mag_a), r_hi / (d_hi * mag_a)));
    }
    const double width = std::max(0.0, std::acos(std::max(-1.0, c_lo)) - std::acos(std::min(1.0, c_hi))) / 2 * 180 /
                         std::numbers::pi;
    out.frequency_hz.push_back(f);
    out.magnitude_low.push_back(d_lo);
    out.magnitude_high.push_back(d_hi);
    out.real_part.push_back(x);
    out.real_part_bound.push_back(h);
    out.source_match_part.push_back(sm);
    out.cos_low.push_back(c_lo);
    out.cos_high.push_back(c_hi);
    out.phase_half_width_deg.push_back(width);
    widths.push_back(width);
  }
  if (!widths.empty()) {
    std::nth_element(widths.begin(), widths.begin() + widths.size() / 2, widths.end());
    out.median_phase_half_width_deg = widths[widths.size() / 2];
    out.supported = out.median_phase_half_width_deg <= 45;
  }
  return out;
}

}  // namespace echoline::core
