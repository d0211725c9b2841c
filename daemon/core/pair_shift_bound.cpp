// The offset pair's resonance bound (pair_shift_bound.hpp). Derivation and the terms, one by
// one: MEASUREMENT.md §12.1. Notation there: y = w·((p_A − L) + x̂·(p_B − L)) with p_A = |d + Γ'|²,
// p_B = |d + μ + τ·Γ''|², τ = −a·e^{jδ}, L = |d + Γ_L|², so
//   y = g_c·|Γ|² + N,   g_c = w·(1 + x̂·a²),
// and every term of N is a product of the bench's slowly turning error phasors with at least one
// small factor (the line's turn error, its loss error, its mismatch, the LOAD's residual, the
// source match, the connection).
#include "daemon/core/pair_shift_bound.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <numbers>
#include <optional>
#include <utility>

#include "daemon/core/poly_fit.hpp"

namespace echoline::core {
namespace {

constexpr double kTwoPi = 2 * std::numbers::pi;

// The fit windows, dB under the dip's bottom: a wide one places the vertex better, a narrow one
// has the unit's |Γ|, hence most terms and the reference's turning, smaller at its edges.
constexpr double kPairWindowsDb[] = {6.0, 3.0, 1.5};

struct Line {
  double a_lo, a_hi, x_hat, w;
  double kappa;    // bound of |1 − x̂·a·e^{jδ}|: what the half turn leaves of the leakage cross term
  double kappa3;   // bound of |1 − x̂·a³·e^{jδ}|: the same for the source match's first order
};

Line line_terms(const PairNuisance& n) {
  Line l;
  l.a_hi = std::min(1.0, std::pow(10.0, -(n.line.loss_db - n.line.loss_tolerance_db) / 10));
  l.a_lo = std::pow(10.0, -(n.line.loss_db + n.line.loss_tolerance_db) / 10);
  l.x_hat = 1 / std::min(1.0, std::pow(10.0, -n.line.loss_db / 10));
  l.w = l.x_hat / (1 + l.x_hat);
  const double turn = 2 * std::sin(0.5 * std::min(n.turn_error_rad, std::numbers::pi));   // |1 − e^{jδ}|
  const double dev = std::max(std::fabs(1 - l.x_hat * l.a_lo), std::fabs(1 - l.x_hat * l.a_hi));
  const double dev3 = std::max(std::fabs(1 - l.x_hat * std::pow(l.a_lo, 3)), std::fabs(1 - l.x_hat * std::pow(l.a_hi, 3)));
  l.kappa = dev + l.x_hat * l.a_hi * turn;
  l.kappa3 = dev3 + l.x_hat * std::pow(l.a_hi, 3) * turn;
  return l;
}

// How fast the line's round-trip power factor a² changes, relative, per Hz: the one-way loss L
// (dB) of a coax line grows as √f to f, so |L′| ≤ L/f and |(ln a²)′| = (ln 10/5)·|L′|.
double line_scale_rate(const PairNuisance& n) {
  const double f = n.frequency_hz > 0 ? n.frequency_hz : 1e6;
  return std::log(10.0) / 5 * (n.line.loss_db + n.line.loss_tolerance_db) / f;
}

// Turn rates (rad/Hz) of the phasors in N. The line's phasor a·e^{jδ} (up to its cube) also
// changes size with the loss: 3·|a′|/a = 1.5 × line_scale_rate is added to its turn.
struct Rates {
  double e, line, match, conn, load;
};

Rates rates(const PairNuisance& n) {
  const double tl = n.line.delay_s + n.line.delay_tolerance_s;
  return Rates{kTwoPi * n.error_delay_s, 2 * kTwoPi * tl + 1.5 * line_scale_rate(n),
               kTwoPi * (2 * tl + kLineMatchExtraDelayS), kTwoPi * kConnectionTurnDelayS, kTwoPi * kLoadTurnDelayS};
}

// The reference error's size as it turns, for the slope and for the curvature.
double reference_slope_ratio(const PairNuisance& n) {
  return n.reference_slope_ratio >= 0 ? n.reference_slope_ratio : std::min(n.reference_ratio, 0.5);
}
double reference_curvature_ratio(const PairNuisance& n) {
  return n.reference_curvature_ratio >= 0 ? n.reference_curvature_ratio : std::min(n.reference_ratio, 0.5);
}
double reference_third_ratio(const PairNuisance& n) {
  return n.reference_third_ratio >= 0 ? n.reference_third_ratio : std::min(n.reference_ratio, 0.5);
}

// A term of N as A(f)·Γ^m with |A| ≤ a0, |A'| ≤ a1, |A''| ≤ a2: on a straight trajectory
// (Γ'' = 0, |Γ'| ≤ s, |Γ| ≤ g), |(A·Γ^m)''| ≤ a2·g^m + 2·a1·m·g^(m−1)·s + a0·m(m−1)·g^(m−2)·s².
double term_curvature(double a0, double a1, double a2, int m, double g, double s) {
  const double gm = std::pow(g, m);
  const double gm1 = m >= 1 ? std::pow(g, m - 1) : 0;
  const double gm2 = m >= 2 ? std::pow(g, m - 2) : 0;
  return a2 * gm + 2 * a1 * m * gm1 * s + a0 * m * (m - 1) * gm2 * s * s;
}

// The same for A = amp·(a phasor turning at up to `rate`).
double phasor_curvature(double amp, double rate, int m, double g, double s) {
  return term_curvature(amp, amp * rate, amp * rate * rate, m, g, s);
}

// A = amp·(κ − x̂a³·e^{jδ})-like: a part of size amp·k_fixed turning at r1, less a part of size
// amp·k_turn turning at r1 + r2 that the half turn nearly cancels; |A| ≤ amp·k_abs.
double split_curvature(double amp, double k_abs, double r1, double k_turn, double r2, int m, double g, double s) {
  const double a1 = amp * (r1 * k_abs + k_turn * r2);
  const double a2 = amp * (r1 * r1 * k_abs + 2 * r1 * r2 * k_turn + r2 * r2 * k_turn);
  return term_curvature(amp * k_abs, a1, a2, m, g, s);
}

}  // namespace

void cover_reference_turning(PairNuisance& n, double reference_low_db, double reference_high_db, double leakage,
                             double source_match) {
  // uncertainty.cpp: high = 8.686·(first + second) dB, first ½·|ε(1/Γ_o + 1/Γ_s) + E_S(…)| (turning
  // with the leakage and the source match), second at most w²/(2(1 − w)), w = ε/ρ_min +
  // σ_S/(1 − σ_S) (their squares: twice the rate); low = loss − high, the loss ½(20log ρ_o +
  // 20log ρ_s) ≥ 20log ρ_min. The second order as large as it can be, the rest first order.
  const double ripple_np = std::max(0.0, reference_high_db) / (20 / std::log(10.0));
  const double loss_db = std::min(0.0, reference_low_db + reference_high_db);
  const double rho_min = std::pow(10.0, loss_db / 10);
  const double w = leakage / rho_min + source_match / (1 - std::min(source_match, 0.5));
  const double second = std::min(ripple_np, w < 1 ? w * w / (2 * (1 - w)) : ripple_np);
  const double first = ripple_np - second;
  const double ripple = std::pow(10.0, std::max(0.0, reference_high_db) / 10) - 1;   // as a power ratio
  const double loss = 1 - std::pow(10.0, loss_db / 10);
  const double share1 = ripple_np > 0 ? first / ripple_np : 0, share2 = ripple_np > 0 ? second / ripple_np : 0;
  const double slow = kStandardLossTurnDelayS / std::max(n.error_delay_s, 1e-12);
  n.reference_slope_ratio =
      std::max(n.reference_slope_ratio, ripple * (share1 + 2 * share2) + loss * slow);
  n.reference_curvature_ratio =
      std::max(n.reference_curvature_ratio, ripple * (share1 + 4 * share2) + loss * slow * slow);
  n.reference_third_ratio =
      std::max(n.reference_third_ratio, ripple * (share1 + 8 * share2) + loss * slow * slow * slow);
}

double pair_nuisance_slope(const PairNuisance& n, double g, double s) {
  const Line l = line_terms(n);
  const Rates r = rates(n);
  const double E = n.leakage, rl = n.load_residual, M = n.line.match, S = n.source_match, C = n.connection;
  const double w = l.w, xh = l.x_hat, a = l.a_hi;
  // T1: the leakage's own power less the LOAD reading: −(2·Re(d̄Γ_L) + |Γ_L|²), weight w(1 + x̂);
  // without a LOAD reading |d|² itself, turning at the error delay.
  const double t1 = n.load_subtracted ? 2 * w * (1 + xh) * (r.e * E * rl + (E + rl) * r.load * rl)
                                      : 2 * w * (1 + xh) * r.e * E * E;
  // T2: the offset arm's leakage with the line's mismatch, 2·Re(d̄μ) + |μ|², weight w·x̂.
  const double t2 = 2 * w * xh * M * (r.e * E + r.match * (E + M));
  // T3: the leakage cross term the half turn leaves, 2w·Re(d̄Γ(1 − x̂a·e^{jδ})).
  const double t3 = 2 * w * (r.e * E * g * l.kappa + E * s * l.kappa + E * g * xh * a * r.line);
  // T4: the line's mismatch against the unit, 2·Re(μ̄·τΓ), and its far end's second order
  // (τ·S22·Γ² against d + τΓ), weight w·x̂.
  const double t4 = 2 * w * xh * a * (r.match * M * g + M * s + M * g * r.line) +
                    2 * w * xh * ((r.e * E + a * s + a * g * r.line) * a * M * g * g +
                                  (E + a * g) * a * M * (2 * g * s + g * g * (r.match + r.line)));
  // T5: the source match's first order, 2w·|Γ|²·Re(sΓ(1 − x̂a³e^{jδ})).
  const double t5 = 2 * w * (S * l.kappa3 * (3 * g * g * s + g * g * g * r.e) + S * g * g * g * xh * a * a * a * r.line);
  // T6: leakage times source match, 2·Re(d̄sΓ²) in each reading.
  const double t6 = 2 * w * (1 + xh * a * a) * E * S * (2 * r.e * g * g + 2 * g * s + r.line * g * g);
  // T7: the unit's connection, a vector c of up to C in each reading (made anew, not cancelled):
  // against the leakage and against the unit.
  const double t7 = 2 * w * (1 + xh * a) * (r.e * E * C + E * r.conn * C) + 2 * w * xh * a * E * C * r.line +
                    2 * w * (1 + xh * a * a) * (C * s + (g + C) * r.conn * C);
  // T8: the source match beyond first order: 1/|1 − sΓ|² − 1 − 2Re(sΓ) reaches 3|s|²|Γ|², the same
  // sign in both readings.
  const double t8 = w * (1 + xh) * S * S * (12 * g * g * g * s + 6 * g * g * g * g * r.e);
  // T10: the source match against the offset arm's S11, |Γ_in|²·2Re(sΓ_in) and d̄·s·Γ_in² with
  // Γ_in = S11 + τΓ: up to 6a²·S·M·|Γ|² and 4E·S·M·a·|Γ|, not cancelled by the half turn.
  const double om10 = r.e + r.match + r.line;
  const double t10 = w * xh * (6 * a * a * S * M * (2 * g * s + g * g * om10) + 4 * E * S * M * a * (s + g * om10));
  // T9, the reference error and the line's loss scaling the whole sum, is not a term here: it is
  // bounded on the window's samples themselves (scale_terms).
  return t1 + t2 + t3 + t4 + t5 + t6 + t7 + t8 + t10;
}

double pair_nuisance_magnitude(const PairNuisance& n, double g) {
  const Line l = line_terms(n);
  const double E = n.leakage, rl = n.load_residual, M = n.line.match, S = n.source_match, C = n.connection;
  const double w = l.w, xh = l.x_hat, a = l.a_hi;
  const double mg = M * g < 1 ? 1 / (1 - M * g) : 1e9;
  return w * (1 + xh) * (2 * E * rl + rl * rl) +                                         // T1
         w * xh * (2 * E * M + M * M) +                                                  // T2
         2 * w * E * g * l.kappa +                                                       // T3
         2 * w * xh * a * M * g + 2 * w * xh * (E + a * g) * a * M * g * g * mg +        // T4
         2 * w * S * l.kappa3 * g * g * g +                                              // T5
         2 * w * (1 + xh * a * a) * E * S * g * g +                                      // T6
         2 * w * (1 + xh * a) * E * C + 2 * w * (1 + xh * a * a) * (2 * C * g + C * C) +  // T7
         w * (1 + xh) * 3 * S * S * g * g * g * g +                                      // T8
         w * xh * (6 * a * a * S * M * g * g + 4 * E * S * M * a * g);                   // T10
}

double pair_nuisance_curvature(const PairNuisance& n, double g, double s) {
  const Line l = line_terms(n);
  const Rates r = rates(n);
  const double E = n.leakage, rl = n.load_residual, M = n.line.match, S = n.source_match, C = n.connection;
  const double w = l.w, xh = l.x_hat, a = l.a_hi;
  double b = 0;
  // The terms of pair_nuisance_slope, each with the rates its phasors turn at.
  b += n.load_subtracted ? phasor_curvature(2 * w * (1 + xh) * (E * rl + rl * rl), r.e + r.load, 0, g, s)
                         : phasor_curvature(w * (1 + xh) * E * E, 2 * r.e, 0, g, s);
  b += phasor_curvature(2 * w * xh * M * (E + M), r.e + r.match, 0, g, s);
  b += split_curvature(2 * w * E, l.kappa, r.e, xh * a, r.line, 1, g, s);                       // T3
  b += phasor_curvature(2 * w * xh * a * M, r.match + r.line, 1, g, s) +
       phasor_curvature(2 * w * xh * a * M * (E + a), r.e + r.line + r.match, 2, g, s);         // T4
  b += split_curvature(2 * w * S, l.kappa3, r.e, xh * a * a * a, r.line, 3, g, s);              // T5
  b += phasor_curvature(2 * w * (1 + xh * a * a) * E * S, 2 * (r.e + r.line), 2, g, s);         // T6
  b += phasor_curvature(2 * w * (1 + xh * a) * E * C, r.e + r.conn, 0, g, s) +
       phasor_curvature(2 * w * xh * a * E * C, r.e + r.conn + r.line, 0, g, s) +
       phasor_curvature(2 * w * (1 + xh * a * a) * C, r.conn, 1, g, s) +
       phasor_curvature(w * (1 + xh * a * a) * C * C, 2 * r.conn, 0, g, s);
  b += phasor_curvature(w * (1 + xh) * 3 * S * S, 2 * r.e, 4, g, s);                            // T8
  b += phasor_curvature(w * xh * 6 * a * a * S * M, r.e + r.match + r.line, 2, g, s) +
       phasor_curvature(w * xh * 4 * E * S * M * a, r.e + r.match + r.line, 1, g, s);             // T10
  return b;
}

namespace {

// The bounds between each two neighbouring samples of a fit window, from the two ends' own: the
// unit's |Γ| and the line's turn error at the larger end (both convex along a straight
// trajectory: a distance from a point, the largest of two straight lines' sizes), the LOAD's
// residual too (a step function of the kit's bands; a band narrower than a step between two
// samples is not looked for), the leakage at the larger end raised for its own turning,
// |E_D(f)| ≤ |E_D(f_j)|·(1 + ω_τ·|f − f_j|), so by (1 − ω_τΔf/2) at the middle.
struct IntervalTerms {
  std::vector<PairNuisance> nu;
  std::vector<double> g;
};

IntervalTerms between_samples(const std::vector<PairNuisance>& nu_pt, const std::vector<double>& g_pt,
                              const std::vector<double>& f_hz) {
  IntervalTerms iv;
  for (std::size_t j = 0; j + 1 < nu_pt.size(); ++j) {
    PairNuisance nu = nu_pt[j];
    const double half_turn = 0.5 * kTwoPi * nu.error_delay_s * (f_hz[j + 1] - f_hz[j]);
    nu.leakage = std::max(nu.leakage, nu_pt[j + 1].leakage) / std::max(1e-9, 1 - half_turn);
    nu.load_residual = std::max(nu.load_residual, nu_pt[j + 1].load_residual);
    nu.turn_error_rad = std::max(nu.turn_error_rad, nu_pt[j + 1].turn_error_rad);
    nu.frequency_hz = std::min(nu.frequency_hz, nu_pt[j + 1].frequency_hz);
    iv.nu.push_back(nu);
    iv.g.push_back(std::max(g_pt[j], g_pt[j + 1]));
  }
  return iv;
}

// T9: what scales the whole sum, bounded on the window's own samples. The reference error
// (1 + ε = T/R, |R/T − 1| ≤ ρ, turning at the error delay's rate) scales y exactly, and the line's
// loss changing with frequency scales the offset reading's unit part P = w·x̂·a²|Γ|² (at most
// P_i = w·x̂·a_hi²·g_i² at a sample) by λ relative to the vertex, |λ| ≤ ℓ|x − x_v|(1 + ℓ|x − x_v|):
// y = (1 + ε)(Y + λP) + e, Y the sum at the vertex's scale. About the vertex
// y = (1 + ε_v)Y + (ε − ε_v)Y + (1 + ε)λP + e: the first a scale (c is taken at 1 ∓ ρ), the last
// the fit's noise; the others, with ε − ε_v = ε₁·(x − x_v) + r, |ε₁| ≤ e₁, |r| ≤ ½e₂(x − x_v)²,
// answer to a linear output L of the fit (weights l_i on the samples) as
//   |L[(ε − ε_v)Y]| ≤ e₁·|L[(x − x_v)Y]| + ½e₂·Σ|l_i|(x_i − x_v)²U_i,   |L[(1 + ε)λP]| ≤ Σ|l_i|(1 + ε_max)λ_i P_i,
//   |L[(x − x_v)Y]| ≤ (1 + ρ)·|L[(x − x_v)y]| + Σ|l_i||x_i − x_v|·((1 + ρ)(Δ_i(U_i + λ_i P_i) + kσ_i) + λ_i P_i)
// (Y − y/(1 + ε_v) = −((ε − ε_v)(Y + λP) + e)/(1 + ε_v) − λP), U_i = (|y_i| + kσ_i)(1 + ρ) + λ_i P_i ≥ |Y_i|,
// Δ_i ≥ |ε_i − ε_v|. On a window symmetric about the vertex (x − x_v)·y is odd and its x²
// coefficient nearly vanishes, which a bound of |ε′|·|y′| interval by interval did not see.
// One order further, r = ½ε₂(x − x_v)² + r₃, |ε₂| ≤ e₂, |r₃| ≤ e₃|x − x_v|³/6: the even part's
// fitted slope nearly vanishes likewise, and the smaller of the two bounds is used.
struct ScaleTerms {
  double slope = 0;       // bound of the fitted slope at the vertex, per MHz (before 1/(1 + ε_v))
  double curvature = 0;   // bound of the fitted x² coefficient, per MHz²
};

ScaleTerms scale_terms(const std::vector<double>& x, const std::vector<double>& y, const std::vector<double>& ks,
                       const std::vector<double>& p_high, const double (*inv)[4], double xv, const PairNuisance& n) {
  const double rho = std::min(n.reference_ratio, 0.5);
  const double eps_max = rho / (1 - rho);
  const double om = kTwoPi * n.error_delay_s;
  const double u1 = om * reference_slope_ratio(n), u2 = om * om * reference_curvature_ratio(n);   // of R/T, per Hz
  // ε = 1/(1 + u) − 1: |ε′| ≤ |u′|/(1 − ρ)², |ε″| ≤ |u″|/(1 − ρ)² + 2u′²/(1 − ρ)³; per MHz.
  const double e1 = u1 / ((1 - rho) * (1 - rho)) * 1e6;
  const double e2 = (u2 / ((1 - rho) * (1 - rho)) + 2 * u1 * u1 / std::pow(1 - rho, 3)) * 1e12;
  // |ε‴| ≤ |u‴|/(1 − ρ)² + 6|u′||u″|/(1 − ρ)³ + 6|u′|³/(1 − ρ)⁴ (ε = h(u), h = 1/(1 + u) − 1).
  const double u3 = om * om * om * reference_third_ratio(n);
  const double e3 = (u3 / ((1 - rho) * (1 - rho)) + 6 * u1 * u2 / std::pow(1 - rho, 3) +
                     6 * u1 * u1 * u1 / std::pow(1 - rho, 4)) * 1e18;
  const double ell = line_scale_rate(n) * 1e6;
  double dy1 = 0, dy2 = 0, rest1 = 0, rest2 = 0, quad1 = 0, quad2 = 0, line1 = 0, line2 = 0;
  double dq1 = 0, dq2 = 0, restq1 = 0, restq2 = 0, cube1 = 0, cube2 = 0;
  for (std::size_t i = 0; i < x.size(); ++i) {
    const double p[3] = {1, x[i], x[i] * x[i]};
    double l1 = 0, l2 = 0;
    for (int j = 0; j < 3; ++j) {
      l1 += (inv[1][j] + 2 * xv * inv[2][j]) * p[j];
      l2 += inv[2][j] * p[j];
    }
    const double d = x[i] - xv, ad = std::fabs(d);
    const double t = std::min(1.0, ell * ad);
    const double lam_p = t * (1 + t) * p_high[i];   // |λ·P| (e^t − 1 ≤ t + t² for t ≤ 1)
    const double u = (std::fabs(y[i]) + ks[i]) * (1 + rho) + lam_p;
    const double delta = std::min(2 * eps_max, e1 * ad + 0.5 * e2 * d * d);
    const double err = ad * ((1 + rho) * (delta * (u + lam_p) + ks[i]) + lam_p);
    dy1 += l1 * d * y[i];
    dy2 += l2 * d * y[i];
    rest1 += std::fabs(l1) * err;
    rest2 += std::fabs(l2) * err;
    quad1 += std::fabs(l1) * d * d * u;
    quad2 += std::fabs(l2) * d * d * u;
    dq1 += l1 * d * d * y[i];
    dq2 += l2 * d * d * y[i];
    restq1 += std::fabs(l1) * ad * err;
    restq2 += std::fabs(l2) * ad * err;
    cube1 += std::fabs(l1) * ad * d * d * u;
    cube2 += std::fabs(l2) * ad * d * d * u;
    line1 += std::fabs(l1) * (1 + eps_max) * lam_p;
    line2 += std::fabs(l2) * (1 + eps_max) * lam_p;
  }
  // Two expansions of ε − ε_v, each a bound: to the first order with the second as remainder,
  // and to the second with the third as remainder, where ½ε″(x_v)·(x − x_v)²·Y, even about the
  // vertex, leaves the fitted slope nearly alone on a symmetric window. The smaller holds.
  const double first1 = e1 * ((1 + rho) * std::fabs(dy1) + rest1), first2 = e1 * ((1 + rho) * std::fabs(dy2) + rest2);
  ScaleTerms st;
  st.slope = first1 + std::min(0.5 * e2 * quad1, 0.5 * e2 * ((1 + rho) * std::fabs(dq1) + restq1) + e3 / 6 * cube1) + line1;
  st.curvature =
      first2 + std::min(0.5 * e2 * quad2, 0.5 * e2 * ((1 + rho) * std::fabs(dq2) + restq2) + e3 / 6 * cube2) + line2;
  return st;
}

// How far the terms N can move the fitted vertex from the unit's resonance (Hz), or +inf where
// they could curve the parabola as much as the unit does. `k` are the window's kernels at the
// vertex, `k3` (optional) those of its inner half, whose intervals start at `off3` in `iv`;
// c_den and c_slope the curvatures (per Hz², as fitted, less and plus their noise at the
// coverage factor and T9's share) for the denominator and for |k|; scale_slope T9's share of the
// fitted slope (per Hz, scale_terms, already over 1 + ε_v).
//   The unit's part g_c·(|Γ₀|² + |k|²(x − x₀)²) is fitted exactly, so at the vertex
//   0 = 2g_c|k|²(x_v − x₀) + N̂′(x_v): |x_v − x₀| = |N̂′(x_v)|/(2g_c|k|²), 2g_c|k|² = 2c − N̂″
//   ≥ 2c(1 − ρ) − B₂ =: den, |N̂′(x_v)| ≤ Σ∫|K₁|·|N′| and |N̂″| ≤ 2Σ∫|K₂|·|N″| (poly_fit.hpp).
//   B₁ = A + B·|k| (every term of N′ at most linear in |Γ′|): A/den + B·|k|/(2g_c|k|²), the
//   second part at most B·s/den (s ≥ |k|) and at most B/√(2g_c,lo·den) (|k|² ≥ den/(2g_c)).
double vertex_nuisance(const IntervalTerms& iv, const FitKernels& k, const FitKernels* k3, std::size_t off3,
                       double c_den, double c_slope, double scale_slope, const PairNuisance& base) {
  const Line l = line_terms(base);
  const double rho = std::min(base.reference_ratio, 0.5);
  const double g_lo = l.w * (1 + l.x_hat * l.a_lo * l.a_lo);
  if (!(c_den > 0) || !(c_slope > 0)) return std::numeric_limits<double>::infinity();
  auto curvature_bound = [&](const FitKernels& kk, std::size_t first, double s) {
    double b = 0;
    for (std::size_t j = 0; j < kk.curvature.size(); ++j) {
      b += kk.curvature[j] * pair_nuisance_curvature(iv.nu[first + j], iv.g[first + j], s);
    }
    return 2 * b;   // per Hz²: the kernels are dimensionless
  };
  auto b2_of = [&](double s) {
    double b = curvature_bound(k, 0, s);
    if (k3) b = std::max(b, curvature_bound(*k3, off3, s));
    return b;
  };
  auto b1_of = [&](double s) {
    double b = scale_slope;
    for (std::size_t j = 0; j < k.slope.size(); ++j) b += k.slope[j] * pair_nuisance_slope(iv.nu[j], iv.g[j], s);
    return b;   // per Hz
  };
  // The unit's slope |k| from the measured curvature: c·(R/T) = g_c·|k|² + N̂″/2, so
  // |k|² ≤ (c(1 + ρ) + B₂(|k|)/2)/g_c,lo, by iteration.
  const double c_hz = c_slope * (1 + rho);
  double s = std::sqrt(c_hz / g_lo);
  // From below, each step a little past the map's value, until s is at or above its image: then
  // s is at or above the map's one fixed point, which bounds |k|.
  double b2 = b2_of(s);
  bool above = false;
  for (int it = 0; it < 60 && !above; ++it) {
    const double next = std::sqrt((c_hz + 0.5 * b2) / g_lo);
    if (next <= s) {
      above = true;
    } else {
      s = next * 1.001;
      b2 = b2_of(s);
    }
  }
  if (!above) return std::numeric_limits<double>::infinity();   // no fixed point in reach: no bound
  const double den = 2 * c_den * (1 - rho) - b2;
  if (!(den > 0)) return std::numeric_limits<double>::infinity();
  const double a = b1_of(0), b = (b1_of(s) - a) / s;
  return a / den + b * std::min(s / den, 1 / std::sqrt(2 * g_lo * den));
}

// The trace's nuisance with sample i's own bounds.
PairNuisance point_nuisance(const PairSumTrace& t, std::size_t i) {
  PairNuisance nu = t.nuisance;
  nu.leakage = t.leakage[i];
  nu.load_residual = t.load_residual[i];
  nu.turn_error_rad = t.turn_error_rad[i];
  nu.frequency_hz = t.frequency_hz[i];
  return nu;
}

// The bound from the points within `below_db` of the peak.
std::optional<PairShiftBound> bound_over(const PairSumTrace& t, std::size_t peak, double below_db) {
  const std::size_t n = t.y.size();
  const Line l = line_terms(t.nuisance);
  const double g_lo = l.w * (1 + l.x_hat * l.a_lo * l.a_lo);
  // The windows' levels are set under the dip's bottom, taken as at least what the terms N and
  // the noise could make of it there: where N is as large as the unit's |Γ₀|² (a 25 dB coupler)
  // the bottom's estimate can read 45 dB on a 26 dB unit, and a window under that estimate would
  // shrink to a few points. Any window bounds (12.1); this one spans the unit's own dip.
  double bottom_rl = t.return_loss_db[peak];
  const double floor_y = (pair_nuisance_magnitude(point_nuisance(t, peak), std::min(1.0, t.gamma_high[peak])) +
                          t.coverage_factor * t.sigma_y[peak]) / g_lo;
  if (floor_y > 0) bottom_rl = std::min(bottom_rl, -10 * std::log10(floor_y));
  auto window = [&](double below_db, std::size_t& lo, std::size_t& hi) {
    lo = hi = peak;
    while (lo > 0 && t.return_loss_db[lo - 1] >= bottom_rl - below_db) --lo;
    while (hi + 1 < n && t.return_loss_db[hi + 1] >= bottom_rl - below_db) ++hi;
  };
  std::size_t lo = 0, hi = 0;
  window(below_db, lo, hi);
  if (peak - lo < 2 || hi - peak < 2) return std::nullopt;   // too sparse to fit
  if (lo == 0 || hi + 1 == n) return std::nullopt;           // broad: the dip runs off the sweep
  const double f_pk = t.frequency_hz[peak];
  for (std::size_t i = lo; i <= hi; ++i) {
    if (!t.usable[i]) return std::nullopt;
  }
  auto fit = [&](std::size_t a, std::size_t b, std::vector<double>& x, std::vector<double>& y, double* q,
                 double (*inv)[4], double& var) {
    x.clear();
    y.clear();
    var = 0;
    for (std::size_t i = a; i <= b; ++i) {
      x.push_back((t.frequency_hz[i] - f_pk) / 1e6);
      y.push_back(t.y[i]);
      var += t.sigma_y[i] * t.sigma_y[i];
    }
    var /= static_cast<double>(x.size());
    return least_squares(x, y, 3, q, inv);
  };
  // Each point's own bounds: its leakage, LOAD residual and turn error, and the unit's |Γ| from
  // the sum itself, g_c·|Γ|² ≤ y·(1 + ρ) + k·σ_y + |N|, |N| bounded at the point's own |Γ| bound
  // (twice, each pass a valid bound); never above the point's interval. Tighter than the points'
  // bounds where the leakage's size is poorly known.
  const double rho = std::min(t.nuisance.reference_ratio, 0.5);
  std::vector<PairNuisance> nu_pt;
  std::vector<double> g_pt;
  for (std::size_t i = lo; i <= hi; ++i) {
    const PairNuisance nu = point_nuisance(t, i);
    double g = std::min(1.0, t.gamma_high[i]);
    for (int pass = 0; pass < 2; ++pass) {
      const double g2 = (std::max(0.0, t.y[i]) * (1 + rho) + t.coverage_factor * t.sigma_y[i] + pair_nuisance_magnitude(nu, g)) / g_lo;
      g = std::min(g, std::sqrt(g2));
    }
    nu_pt.push_back(nu);
    g_pt.push_back(g);
  }
  std::vector<double> x, y;
  double q[4], inv[4][4], var = 0;
  if (!fit(lo, hi, x, y, q, inv, var)) return std::nullopt;
  double c = q[2];   // per MHz²
  if (!(c > 0)) return std::nullopt;
  const double xv = -q[1] / (2 * c);
  if (xv < x.front() || xv > x.back()) return std::nullopt;
  const double sigma_xv = vertex_sigma(x, y, q, inv, var);
  // The curvature's own noise, at the coverage factor: lower for the denominator, higher for |k|.
  const double c_noise = t.coverage_factor * std::sqrt(fit_variance(x, y, q, var) * inv[2][2]);
  const double gap = std::fabs(cubic_minimum_near(x, y, xv) - xv);
  PairNuisance base = t.nuisance;
  base.frequency_hz = t.frequency_hz[lo];
  auto noise_of = [&](std::size_t a, std::size_t b) {
    std::vector<double> ks;
    for (std::size_t i = a; i <= b; ++i) ks.push_back(t.coverage_factor * t.sigma_y[i]);
    return ks;
  };
  auto offset_part_of = [&](std::size_t a, std::size_t b) {   // the offset reading's unit part, at most
    std::vector<double> p;
    for (std::size_t i = a; i <= b; ++i) p.push_back(l.w * l.x_hat * l.a_hi * l.a_hi * g_pt[i - lo] * g_pt[i - lo]);
    return p;
  };
  // What scales the whole sum (T9), on the samples: its share of the fitted slope and curvature.
  const ScaleTerms scale = scale_terms(x, y, noise_of(lo, hi), offset_part_of(lo, hi), inv, xv, base);
  // A flat-bottomed dip curves less near its bottom than over the whole window: the curvature
  // over the inner half (in dB), where that has points enough, when smaller, for the denominator;
  // the larger for the unit's slope, which must bound it over the whole window.
  double c_den = c - c_noise - scale.curvature, c_slope = c + c_noise + scale.curvature;
  std::optional<FitKernels> kern3;
  std::size_t lo3 = 0, hi3 = 0;
  {
    window(below_db / 2, lo3, hi3);
    std::vector<double> x3, y3;
    double q3[4], inv3[4][4], var3 = 0;
    if (peak - lo3 >= 2 && hi3 - peak >= 2 && fit(lo3, hi3, x3, y3, q3, inv3, var3) && q3[2] > 0) {
      const double xv3 = -q3[1] / (2 * q3[2]);
      const double c3_noise = t.coverage_factor * std::sqrt(fit_variance(x3, y3, q3, var3) * inv3[2][2]) +
                              scale_terms(x3, y3, noise_of(lo3, hi3), offset_part_of(lo3, hi3), inv3, xv3, base).curvature;
      c_den = std::min(c_den, q3[2] - c3_noise);
      c_slope = std::max(c_slope, q3[2] + c3_noise);
      kern3 = quadratic_fit_kernels(x3, inv3, xv3);
    }
  }
  const FitKernels kern = quadratic_fit_kernels(x, inv, xv);
  const std::vector<double> f_win(t.frequency_hz.begin() + static_cast<long>(lo),
                                  t.frequency_hz.begin() + static_cast<long>(hi) + 1);
  const double nuisance_hz =
      vertex_nuisance(between_samples(nu_pt, g_pt, f_win), kern, kern3 ? &*kern3 : nullptr, lo3 - lo,
                      c_den / 1e12, c_slope / 1e12, (1 + rho) * scale.slope / 1e6, base);
  if (!std::isfinite(nuisance_hz)) return std::nullopt;   // the terms could curve as much as the unit
  const double half_step_hz =
      0.5 * std::max(t.frequency_hz[peak + 1] - f_pk, f_pk - t.frequency_hz[peak - 1]);
  // Lopsided: the cubic places the measured minimum far from the quadratic's vertex.
  if (gap * 1e6 > std::max(4 * half_step_hz, nuisance_hz)) return std::nullopt;
  PairShiftBound out;
  out.center_hz = f_pk + xv * 1e6;
  out.nuisance_hz = nuisance_hz;
  out.statistical_hz = t.coverage_factor * sigma_xv * 1e6;
  out.gap_hz = gap * 1e6;
  out.half_width_hz = out.nuisance_hz + out.statistical_hz + out.gap_hz + half_step_hz;
  return out;
}

}  // namespace

std::optional<PairShiftBound> pair_shift_bound(const PairSumTrace& t, std::size_t peak) {
  const std::size_t n = t.y.size();
  if (n < 5 || peak >= n || t.frequency_hz.size() != n || t.sigma_y.size() != n || t.gamma_high.size() != n ||
      t.return_loss_db.size() != n || t.leakage.size() != n || t.load_residual.size() != n ||
      t.turn_error_rad.size() != n || t.usable.size() != n) {
    return std::nullopt;
  }
  const double peak_rl = t.return_loss_db[peak];
  if (!std::isfinite(peak_rl) || peak_rl < 12.0) return std::nullopt;   // shallow: a curved trajectory
  // Over 6 dB the vertex is well determined but the unit's |Γ| at the window's edges (where the
  // terms the sum leaves are largest) is twice its bottom; over 3 dB and 1.5 dB the reverse, and
  // the reference's ripple turns less across them. Each bound holds, so the intersection does.
  std::optional<PairShiftBound> out;
  double low = -std::numeric_limits<double>::infinity(), high = std::numeric_limits<double>::infinity();
  for (double below_db : kPairWindowsDb) {
    const auto b = bound_over(t, peak, below_db);
    if (!b) continue;
    low = std::max(low, b->center_hz - b->half_width_hz);
    high = std::min(high, b->center_hz + b->half_width_hz);
    if (!out || b->half_width_hz < out->half_width_hz) out = b;
  }
  if (!out) return std::nullopt;
  if (!(low <= high)) return std::nullopt;   // all cannot hold: an assumption failed
  out->center_hz = 0.5 * (low + high);
  out->half_width_hz = 0.5 * (high - low);
  return out;
}

double pair_shift_half_width(const PairNuisance& n, double g0, double radius, double s, double step_hz,
                             double noise_rel) {
  const Line l = line_terms(n);
  const double g_lo = l.w * (1 + l.x_hat * l.a_lo * l.a_lo);
  const double rho = std::min(n.reference_ratio, 0.5);
  // The nominal dip |Γ|² = g0² + s²x², sampled every step with a sample on its resonance, fitted
  // as the station fits it (pair_shift_bound: each point's |Γ| bounded by the points' interval
  // and twice by the sum itself, the window's kernels, its inner half's).
  // The windows' levels under the bottom taken at least at what N and the noise could make of it
  // (bound_over).
  const double bottom2 =
      std::max(g0 * g0, (pair_nuisance_magnitude(n, std::min(1.0, g0 + radius)) + noise_rel * g0 * g0) / g_lo);
  auto points = [&](double below_db) {
    const double span = std::sqrt(std::max(0.0, std::pow(10.0, below_db / 10) * bottom2 - g0 * g0)) / s;
    const int m = static_cast<int>(std::floor(span / step_hz + 1e-9));
    std::vector<double> x;
    for (int i = -m; i <= m; ++i) x.push_back(i * step_hz / 1e6);
    return x;
  };
  // Each sample's |Γ| bound, as the station would bound it from the sum.
  auto gamma_bounds = [&](const std::vector<double>& x) {
    std::vector<double> g_pt;
    for (double xi : x) {
      const double gt = std::sqrt(g0 * g0 + s * s * xi * xi * 1e12);
      double g = std::min(1.0, gt + radius);
      for (int pass = 0; pass < 2; ++pass) {
        g = std::min(g, std::sqrt((gt * gt * (1 + rho + noise_rel) + pair_nuisance_magnitude(n, g)) / g_lo));
      }
      g_pt.push_back(g);
    }
    return g_pt;
  };
  // The window's kernels and T9's share, on the sum the station would read there.
  auto kernels = [&](const std::vector<double>& x,
                     const std::vector<double>& g_pt) -> std::optional<std::pair<FitKernels, ScaleTerms>> {
    if (x.size() < 5) return std::nullopt;   // fewer than 2 points each side: the station refuses
    std::vector<double> y, ks, p_high;
    for (std::size_t i = 0; i < x.size(); ++i) {
      y.push_back(g_lo * (g0 * g0 + s * s * x[i] * x[i] * 1e12));
      ks.push_back(noise_rel * y.back());
      p_high.push_back(l.w * l.x_hat * l.a_hi * l.a_hi * g_pt[i] * g_pt[i]);
    }
    double q[4], inv[4][4];
    if (!least_squares(x, y, 3, q, inv)) return std::nullopt;
    return std::make_pair(quadratic_fit_kernels(x, inv, 0.0), scale_terms(x, y, ks, p_high, inv, 0.0, n));
  };
  double best = std::numeric_limits<double>::infinity();
  for (double below_db : kPairWindowsDb) {
    const std::vector<double> x = points(below_db), x3 = points(below_db / 2);
    const std::vector<double> g_pt = gamma_bounds(x);
    const auto k = kernels(x, g_pt);
    if (!k) continue;
    const auto k3 = kernels(x3, gamma_bounds(x3));
    const double scale_c = std::max(k->second.curvature, k3 ? k3->second.curvature : 0.0) / 1e12;
    const std::vector<PairNuisance> nu_pt(x.size(), n);
    const double c = g_lo * s * s;   // what the station would measure, at the reference's middle
    std::vector<double> f_hz;
    for (double xi : x) f_hz.push_back(xi * 1e6);
    best = std::min(best, vertex_nuisance(between_samples(nu_pt, g_pt, f_hz), k->first, k3 ? &k3->first : nullptr,
                                          (x.size() - x3.size()) / 2, c - scale_c, c + scale_c,
                                          (1 + rho) * k->second.slope / 1e6, n));
  }
  return best + step_hz / 2;
}

}  // namespace echoline::core
