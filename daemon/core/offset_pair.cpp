// The offset pair's |Γ| interval (offset_pair.hpp; derivation in MEASUREMENT.md §12).
#include "daemon/core/offset_pair.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

namespace echoline::core {
namespace {

constexpr double kPi = std::numbers::pi;

double from_db_power(double db) { return std::pow(10.0, db / 10.0); }

// |Γ|² as the pair gives it before the residual: x·(c·p_A − D² + x·(c·p_B − D²))/(x + 1), x = 1/a.
double pair_g2(double x, double pa, double pb, double d2) { return x * (pa - d2 + x * (pb - d2)) / (x + 1.0); }

// Smallest and largest of pair_g2 over x in [x_lo, x_hi]: the ends and the stationary points,
// where β·x² + 2β·x + α = 0 (α = p_A − D², β = p_B − D²).
void pair_g2_range(double x_lo, double x_hi, double pa, double pb, double d2, double& lo, double& hi) {
  lo = std::min(pair_g2(x_lo, pa, pb, d2), pair_g2(x_hi, pa, pb, d2));
  hi = std::max(pair_g2(x_lo, pa, pb, d2), pair_g2(x_hi, pa, pb, d2));
  const double alpha = pa - d2, beta = pb - d2;
  if (beta == 0.0) return;
  const double disc = 1.0 - alpha / beta;
  if (disc < 0.0) return;
  for (double x : {-1.0 - std::sqrt(disc), -1.0 + std::sqrt(disc)}) {
    if (x > x_lo && x < x_hi) {
      lo = std::min(lo, pair_g2(x, pa, pb, d2));
      hi = std::max(hi, pair_g2(x, pa, pb, d2));
    }
  }
}

// Bound on what the sum p_A + p_B/a leaves besides D²(1 + 1/a) + |Γ|²(1 + a), for |Γ| ≤ g
// (MEASUREMENT.md §12, the terms R1–R5). The source match's first-order terms are bounded
// together, because the half turn cancels most of them too. cn: the unit's own connection
// (k·u_conn), made anew for each reading.
double residual_bound(double g, double d_hi, double a_lo, double a_hi, double x_hi, double s, double m, double cn,
                      double turn) {
  const double turn_factor = 2.0 * std::sin(turn / 2.0);                          // |1 − e^{jδ}|
  const double r1 = 2.0 * d_hi * g * turn_factor;                                 // 2·Re(d̄Γ(1 − e^{jδ}))
  const double r2 = 2.0 * g * g * g * s * ((1.0 - a_lo * a_lo) + turn_factor);    // 2|Γ|²·Re(sΓ(1 − a²e^{jδ}))
  const double r3 = 2.0 * d_hi * s * g * g * (1.0 + a_hi);                        // 2·Re(d̄sΓ²(1 + τ²/a))
  // Direct reading: g_A = Γ + c_A (the connection), Γ'_A = Γ + sΓ² + ν_A.
  const double ga = std::min(1.0, g + cn);
  const double nu_a = cn + s * cn * (2.0 * g + cn) + s * s * ga * ga * ga / (1.0 - s * ga);
  const double r4 = 2.0 * (d_hi + g) * nu_a + (s * g * g + nu_a) * (s * g * g + nu_a);
  // Offset reading: g_B = τΓ + μ (the line's mismatch and the connection at its far end),
  // Γ'_B = τΓ + sτ²Γ² + ν_B. A passive line and unit keep |g_B| ≤ 1.
  const double gc = std::min(1.0, g + cn);
  const double mu = m + a_hi * (cn + m * gc * gc / (1.0 - m * gc));
  const double gb = std::min(1.0, a_hi * g + mu);
  const double rb = s * s * gb * gb * gb / (1.0 - s * gb);
  const double nu = mu + s * mu * (2.0 * a_hi * g + mu) + rb;
  const double wb = a_hi * a_hi * s * g * g + nu;
  const double r5 = x_hi * (2.0 * (d_hi + a_hi * g) * nu + wb * wb);
  return r1 + r2 + r3 + r4 + r5;
}

}  // namespace

double offset_turn_error(double frequency_hz, const OffsetLine& line) {
  // t² = a·e^(−j2ωτ): its angle from π is wrap(2ωτ − π), linear in τ over the tolerance.
  const double w2 = 4.0 * kPi * frequency_hz;
  const double lo = w2 * (line.delay_s - line.delay_tolerance_s) - kPi;
  const double width = w2 * 2.0 * line.delay_tolerance_s;
  if (width >= 2.0 * kPi) return kPi;
  const double lo_wrapped = lo - 2.0 * kPi * std::floor((lo + kPi) / (2.0 * kPi));   // in [−π, π)
  const double hi = lo_wrapped + width;
  if (hi > kPi) return kPi;   // the range holds a turn of 0 (no cancellation at all)
  return std::max(std::abs(lo_wrapped), std::abs(hi));
}

OffsetPairInterval combine_offset_pair(const OffsetPairPoint& p, const OffsetLine& line) {
  OffsetPairInterval out;
  out.turn_error_rad = offset_turn_error(p.frequency_hz, line);
  if (out.turn_error_rad > kPi / 2.0) return out;   // usable = false, [0, 1]
  const double k = p.coverage_factor;
  // a = |τ| = |t|² (the reflection passes the line twice; its one-way loss L gives |t|² =
  // 10^(−L/10)), never above 1 for a passive line; x = 1/a.
  const double a_hi = std::min(1.0, from_db_power(-(line.loss_db - line.loss_tolerance_db)));
  const double a_lo = from_db_power(-(line.loss_db + line.loss_tolerance_db));
  const double x_lo = 1.0 / a_hi, x_hi = 1.0 / a_lo;
  // The true powers relative to T are c·p with c = 10^((R − T)/10); R's noise scales both alike.
  const double c_lo = from_db_power(p.reference_low_db - k * p.reference_sigma_db);
  const double c_hi = from_db_power(p.reference_high_db + k * p.reference_sigma_db);
  const double d_lo = std::max(0.0, p.directivity_low), d_hi = p.directivity_high;
  const double s = p.source_match, m = line.match;

  // Each reading's noise at the coverage factor, converted exactly (a reading k·σ dB high is
  // 10^(kσ/10) − 1 high in power; low, less), the two readings independent.
  const double ea = from_db_power(k * p.sigma_direct_db) - 1.0;
  const double eb = from_db_power(k * p.sigma_offset_db) - 1.0;
  const double w = x_hi / (x_hi + 1.0);
  out.g2_noise = std::hypot(w * c_hi * p.p_direct * ea, w * x_hi * c_hi * p.p_offset * eb);

  // A first bound on |Γ| from the direct reading alone (§3.6), then tightened by the pair.
  const double cn = std::max(0.0, p.connection);
  const double g_prime = std::sqrt(c_hi * p.p_direct * (1.0 + ea)) + d_hi;
  double g_bound = s * g_prime < 1.0 ? std::min(1.0, g_prime / (1.0 - s * g_prime) + cn) : 1.0;
  double g2_lo = 0, g2_hi = 1;
  for (int pass = 0; pass < 4; ++pass) {
    out.residual = residual_bound(g_bound, d_hi, a_lo, a_hi, x_hi, s, m, cn, out.turn_error_rad);
    double lo_lo, lo_hi, hi_lo, hi_hi;
    pair_g2_range(x_lo, x_hi, c_lo * p.p_direct, c_lo * p.p_offset, d_hi * d_hi, lo_lo, lo_hi);
    pair_g2_range(x_lo, x_hi, c_hi * p.p_direct, c_hi * p.p_offset, d_lo * d_lo, hi_lo, hi_hi);
    g2_lo = lo_lo - w * out.residual - out.g2_noise;
    g2_hi = hi_hi + w * out.residual + out.g2_noise;
    const double next = std::sqrt(std::clamp(g2_hi, 0.0, 1.0));
    if (next >= g_bound) break;
    g_bound = next;
  }
  out.gamma_low = std::sqrt(std::clamp(g2_lo, 0.0, 1.0));
  out.gamma_high = std::min(g_bound, std::sqrt(std::clamp(g2_hi, 0.0, 1.0)));
  const double c_mid = from_db_power((p.reference_low_db + p.reference_high_db) / 2);
  const double x_mid = 1.0 / std::min(1.0, from_db_power(-line.loss_db));
  const double g2_mid = pair_g2(x_mid, c_mid * p.p_direct, c_mid * p.p_offset, (d_lo * d_lo + d_hi * d_hi) / 2);
  const double g_mid = std::sqrt(std::clamp(g2_mid, 0.0, 1.0));
  // An empty interval (the readings disagree beyond the bounds) has no inside to clamp into.
  out.gamma_estimate = out.gamma_low <= out.gamma_high ? std::clamp(g_mid, out.gamma_low, out.gamma_high) : g_mid;
  out.usable = true;
  return out;
}

double offset_pair_error_radius(double g, double frequency_hz, double directivity_low, double directivity_high,
                                double source_match, double connection, double sigma_db, double coverage_factor,
                                const OffsetLine& line, double fallback, double reference_low_db,
                                double reference_high_db, double reference_sigma_db) {
  const double directivity = directivity_high;
  // The readings of a unit whose reflection is a quarter turn from the leakage (no cross term
  // in either reading): p_A = D² + g², p_B = D² + a²g²; any other phase gives the same sum.
  const double a = std::pow(10.0, -line.loss_db / 10.0);
  const double d2 = directivity * directivity;
  OffsetPairPoint p;
  p.frequency_hz = frequency_hz;
  p.p_direct = d2 + g * g;
  p.p_offset = d2 + a * a * g * g;
  p.sigma_direct_db = p.sigma_offset_db = sigma_db;
  p.reference_low_db = reference_low_db;
  p.reference_high_db = reference_high_db;
  p.reference_sigma_db = reference_sigma_db;
  p.coverage_factor = coverage_factor;
  p.directivity_high = directivity;
  p.directivity_low = std::clamp(directivity_low, 0.0, directivity);
  p.source_match = source_match;
  p.connection = connection;
  const OffsetPairInterval i = combine_offset_pair(p, line);
  if (!i.usable) return fallback;
  return std::min(fallback, std::max(i.gamma_high - g, g - i.gamma_low));
}

}  // namespace echoline::core
