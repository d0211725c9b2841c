// Uncertainty budget (uncertainty.hpp). Model and derivation: daemon/core/MEASUREMENT.md, "The budget".
//
// One-port scalar model at each frequency, every quantity relative to the true full-reflection
// level T (dB):  P_x = T + 20·log10|E_D + Γ_x/(1 − E_S·Γ_x)| + n_x
// (E_D directivity leakage, E_S source match, n_x reading noise; the error-term form is the
// one-port error model of common practice, no source). The reference R = (P_OPEN + P_SHORT)/2
// differs from T by a bounded error (standards' loss and phase, first-order ripple left over,
// second-order ripple) and by noise; |E_D| is bounded from the LOAD reading plus the kit's LOAD
// residual; noise is measured from repeated sweeps.
#include "daemon/core/uncertainty.hpp"

#include <algorithm>
#include <cmath>
#include <complex>
#include <limits>

#include <fmt/format.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/frequency_text.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kDbPerNeper = 20.0 / 2.302585092994046;  // 20·log10(e) = 8.6859 dB per neper of amplitude

double amp(double db) { return std::pow(10.0, db / 20); }
double db_of_amp(double a) { return 20 * std::log10(a); }

// Upper one-sided 95 % confidence limit of σ from n squared deviations (n degrees of freedom):
// σ_up = σ̂·sqrt(n / χ²_{0.05}(n)), χ² quantile by the Wilson–Hilferty approximation
// (Wilson & Hilferty 1931: χ²_p(n) ≈ n·(1 − 2/(9n) + z_p·sqrt(2/(9n)))³, z_0.05 = −1.645).
double sigma_upper(double sigma_hat, std::size_t n) {
  if (n == 0) return sigma_hat;
  const double nn = static_cast<double>(n);
  const double c = 2.0 / (9.0 * nn);
  const double q = nn * std::pow(1.0 - c - 1.6449 * std::sqrt(c), 3);
  if (!(q > 0)) return sigma_hat * 3;
  return sigma_hat * std::sqrt(nn / q);
}

// σ of one reading from two sweeps of the same standard over points [lo, hi]: the difference of
// two independent readings has variance 2σ².
double repeat_sigma(const std::vector<Reading>& a, const std::vector<Reading>& b, std::size_t lo, std::size_t hi,
                    std::size_t& pairs) {
  double s = 0;
  pairs = 0;
  for (std::size_t i = lo; i <= hi && i < a.size() && i < b.size(); ++i) {
    const double d = a[i].raw_dbm - b[i].raw_dbm;
    if (!std::isfinite(d)) continue;
    s += d * d;
    ++pairs;
  }
  if (pairs == 0) return 0;
  return sigma_upper(std::sqrt(s / (2.0 * static_cast<double>(pairs))), pairs);
}

// Bounded error of the reference R − T at one point, for a directivity bound `eps`.
struct RefError {
  double low_db = 0, high_db = 0;
};
RefError reference_error(const CalKit& kit, double f, bool with_short, double eps, double src) {
  const double rho_o = kit.open.min_magnitude;
  const double rho_s = kit.short_.min_magnitude;
  RefError e;
  if (!with_short) {
    // R − T = 20log|Γ_o| + 20log|1 + w|, |w| <= ε/|Γ_o| + σ_S|Γ_o|/(1 − σ_S|Γ_o|).
    const double w = eps / rho_o + src / (1 - src);
    e.low_db = db_of_amp(rho_o) + (w < 1 ? db_of_amp(1 - w) : -kInf);
    e.high_db = db_of_amp(1 + w);
    return e;
  }
  const double rho_min = std::min(rho_o, rho_s);
  // |Γ_o + Γ_s|: the kit's model phases plus their tolerances plus the magnitude spread.
  const std::complex<double> sum = open_gamma(kit.open, f) + short_gamma(kit.short_, f);
  const double a = std::abs(sum) + kit.open.phase_tolerance_rad + kit.short_.phase_tolerance_rad + (1 - rho_min);
  // First-order ripple left over: ½·|ε(1/Γ_o + 1/Γ_s) + E_S(Γ_o/(1−E_SΓ_o) + Γ_s/(1−E_SΓ_s))|.
  const double first = 0.5 * (eps * a / (rho_min * rho_min) + src * (a + 2 * src) / ((1 - src) * (1 - src)));
  // Second order: |ln|1+w| − Re w| <= |w|²/(2(1−|w|)) for each standard, averaged.
  const double w = eps / rho_min + src / (1 - src);
  const double second = w < 1 ? w * w / (2 * (1 - w)) : kInf;
  const double ripple_db = kDbPerNeper * (first + second);
  // Standards' own loss: R reads low by ½(20log|Γ_o| + 20log|Γ_s|) ∈ [½(…min…), 0].
  const double loss_low_db = 0.5 * (db_of_amp(rho_o) + db_of_amp(rho_s));
  e.low_db = loss_low_db - ripple_db;
  e.high_db = ripple_db;
  return e;
}

}  // namespace

ReferenceErrorBounds reference_error_bounds(const CalKit& kit, double frequency_hz, bool with_short,
                                            double directivity_bound, double source_match) {
  const RefError e = reference_error(kit, frequency_hz, with_short, directivity_bound, source_match);
  return {e.low_db, e.high_db};
}

double frequency_offset_db(const std::vector<double>& f, const std::vector<double>& level_db, std::size_t i,
                           double offset_hz) {
  if (!(offset_hz > 0) || f.size() < 2) return 0;
  // g(x) = the trace a fraction x of a step from point i. For g convex (or concave) on
  // [f_{i-1}, f_{i+1}] the chord slope from f_i to f_i + x is monotone in x, so for |x| up to
  // the neighbour's distance |g(x) − g(0)| ≤ |x|·max(chord slope to either neighbour).
  double slope = 0;   // dB/Hz, the steeper chord
  if (i > 0) slope = std::max(slope, std::abs(level_db[i] - level_db[i - 1]) / (f[i] - f[i - 1]));
  if (i + 1 < f.size()) slope = std::max(slope, std::abs(level_db[i + 1] - level_db[i]) / (f[i + 1] - f[i]));
  return std::isfinite(slope) ? slope * offset_hz : kInf;
}

std::vector<double> frequency_offset_db(const std::vector<Reading>& trace, double offset_hz) {
  std::vector<double> f, p, out;
  f.reserve(trace.size());
  p.reserve(trace.size());
  for (const Reading& r : trace) {
    f.push_back(r.frequency_hz);
    p.push_back(r.raw_dbm);
  }
  out.reserve(trace.size());
  for (std::size_t i = 0; i < trace.size(); ++i) out.push_back(frequency_offset_db(f, p, i, offset_hz));
  return out;
}

std::vector<double> frequency_offset_sigma_db(const std::vector<double>& f, const std::vector<double>& sigma_db,
                                              double offset_hz) {
  std::vector<double> out(f.size(), 0.0);
  if (!(offset_hz > 0) || f.size() < 2 || sigma_db.size() != f.size()) return out;
  for (std::size_t i = 0; i < f.size(); ++i) {
    double worst = 0;
    for (std::size_t j : {i - 1, i + 1}) {
      if (j >= f.size() || f[j] == f[i]) continue;   // i − 1 wraps to a huge index at i = 0
      worst = std::max(worst, std::hypot(sigma_db[i], sigma_db[j]) / std::abs(f[j] - f[i]));
    }
    out[i] = offset_hz * worst;
  }
  return out;
}

UncertaintyBudget build_budget(const Recipe& recipe, const std::map<std::string, std::vector<Reading>>& traces,
                               const std::vector<double>& reference_dbm, const CalKit& kit, const BudgetInputs& in,
                               std::vector<std::string>& warnings) {
  UncertaintyBudget b;
  b.coverage_factor = in.coverage_factor;
  b.source_match = rho_from_db(in.source_match_db);
  b.connection = kit.connection_repeatability;
  b.noise_floor_dbm = in.noise_floor_dbm;
  b.error_delay_s = in.error_delay_s;
  b.kit_identity = kit.identity;
  b.kit_serial = kit.serial;
  for (const MismatchStandard& m : kit.mismatch) {
    if (traces.count(m.name) > 0) b.mismatch.push_back(m);
  }
  if (recipe.offset_pair) b.offset_line = kit.offset_line;
  const std::vector<Reading>& open = traces.at("OPEN");
  const std::vector<Reading>& load = traces.at("LOAD");
  const bool with_short = traces.count("SHORT") > 0;
  const std::size_t n = open.size();
  const double k = b.coverage_factor;
  // Fast capture: every reading, the standards' too, may be off its plan frequency, by up to
  // half a bin, or much less when a start pulse triggers the receiver (MEASUREMENT.md §11); the reference and the LOAD carry that term here, the unit's
  // reading when it is judged (budget_bounds).
  if (recipe.mode == SweepMode::fast_capture && n >= 2) {
    std::vector<double> plan;
    for (const Reading& r : open) plan.push_back(r.frequency_hz);
    b.frequency_offset_hz = in.frequency_offset_hz >= 0 ? in.frequency_offset_hz : fast_capture_axis(plan).bin_hz() / 2;
  }
  const std::vector<double> open_offset = frequency_offset_db(open, b.frequency_offset_hz);
  const std::vector<double> load_offset = frequency_offset_db(load, b.frequency_offset_hz);
  const std::vector<double> short_offset =
      with_short ? frequency_offset_db(traces.at("SHORT"), b.frequency_offset_hz) : open_offset;

  // Noise per recipe segment.
  const auto open_rep = traces.find("OPEN/repeat");
  const auto load_rep = traces.find("LOAD/repeat");
  const bool have_repeats = open_rep != traces.end() && load_rep != traces.end() && open_rep->second.size() == n &&
                            load_rep->second.size() == n;
  std::size_t first = 0;
  for (const Segment& seg : recipe.segments) {
    if (first >= n) break;
    std::size_t last = first;
    while (last + 1 < n && open[last + 1].frequency_hz <= seg.stop_hz + 1e-3) ++last;
    SegmentNoise sn;
    sn.start_hz = open[first].frequency_hz;
    sn.stop_hz = open[last].frequency_hz;
    double load_mean = 0;
    for (std::size_t i = first; i <= last; ++i) load_mean += load[i].raw_dbm;
    sn.load_level_dbm = load_mean / static_cast<double>(last - first + 1);
    if (have_repeats) {
      std::size_t pairs_o = 0, pairs_l = 0;
      sn.high_level_db = repeat_sigma(open, open_rep->second, first, last, pairs_o);
      sn.load_level_db = repeat_sigma(load, load_rep->second, first, last, pairs_l);
      sn.pairs = std::min(pairs_o, pairs_l);
      sn.measured = sn.pairs >= 2;
    }
    if (!sn.measured) {
      sn.high_level_db = sn.load_level_db = in.assumed_noise_db;
      sn.pairs = 0;
    }
    b.noise.push_back(sn);
    first = last + 1;
  }
  if (!have_repeats) {
    warnings.push_back(fmt::format(
        "reading noise not measured (no repeated OPEN and LOAD sweeps): {:.2f} dB assumed per reading", in.assumed_noise_db));
  }

  b.frequency_hz.resize(n);
  for (std::size_t i = 0; i < n; ++i) b.frequency_hz[i] = open[i].frequency_hz;
  // Fast capture: the noise part of each standard's offset term (statistical, 0 for a step sweep).
  const auto offset_sigma = [&](const std::vector<Reading>& t) {
    std::vector<double> sig(t.size()), fr(t.size());
    for (std::size_t i = 0; i < t.size(); ++i) {
      fr[i] = t[i].frequency_hz;
      sig[i] = reading_sigma_db(b, i, t[i].raw_dbm);
    }
    return frequency_offset_sigma_db(fr, sig, b.frequency_offset_hz);
  };
  const std::vector<double> open_offset_u = offset_sigma(open);
  const std::vector<double> load_offset_u = offset_sigma(load);
  const std::vector<double> short_offset_u = with_short ? offset_sigma(traces.at("SHORT")) : open_offset_u;
  b.reference_error_low_db.resize(n);
  b.reference_error_high_db.resize(n);
  b.reference_noise_db.resize(n);
  b.directivity_bound.resize(n);
  b.directivity_measured.resize(n);
  b.load_residual.resize(n);
  const double src = b.source_match;
  std::size_t uncovered = 0;
  double uncovered_at = 0;
  for (std::size_t i = 0; i < n; ++i) {
    const double f = open[i].frequency_hz;
    b.frequency_hz[i] = f;
    const double rl_load = load_gamma_bound(kit, f);
    if (rl_load >= 1.0) {
      if (uncovered++ == 0) uncovered_at = f;
    }
    const double load_res = rl_load / (1 - src * rl_load);  // |Γ_L/(1 − E_SΓ_L)|
    b.load_residual[i] = rl_load;
    // Noise of the reference: R = (P_o + P_s)/2 -> u_R² = (σ_o² + σ_s²)/4, both at the high level.
    // Fast capture adds the noise part of the standards' offset terms: of the mean, half the
    // root sum of squares of the two.
    const double s_hi = reading_sigma_db(b, i, open[i].raw_dbm);
    const double u_ref_offset =
        with_short ? std::hypot(open_offset_u[i], short_offset_u[i]) / 2 : open_offset_u[i];
    b.reference_noise_db[i] = std::hypot(with_short ? s_hi / std::sqrt(2.0) : s_hi, u_ref_offset);
    const double s_load = reading_sigma_db(b, i, load[i].raw_dbm);
    const double u_load =
        std::sqrt(s_load * s_load + load_offset_u[i] * load_offset_u[i] +
                  b.reference_noise_db[i] * b.reference_noise_db[i]);
    const double load_rel_db = load[i].raw_dbm - reference_dbm[i];
    b.directivity_measured[i] = amp(load_rel_db);
    // |E_D| <= 10^((P_L − T)/20) + |Γ_L'| + k·u_conn, with P_L − T = (P_L − R) + (R − T): the
    // fixed point of this and the reference error (which grows with |E_D|), from below.
    // Fast capture: R = (P_o + P_s)/2 moves by at most the mean of the two standards' offset
    // terms, the LOAD reading by its own (both 0 for a step sweep).
    const double ref_offset = with_short ? (open_offset[i] + short_offset[i]) / 2 : open_offset[i];
    const auto ref_error = [&](double e) {
      RefError r = reference_error(kit, f, with_short, e, src);
      r.low_db -= ref_offset;
      r.high_db += ref_offset;
      return r;
    };
    double eps = amp(load_rel_db) + load_res + k * b.connection;
    RefError re{};
    for (int it = 0; it < 4; ++it) {
      re = ref_error(eps);
      eps = amp(load_rel_db + load_offset[i] + re.high_db + k * u_load) + load_res + k * b.connection;
    }
    eps *= 1.001;  // the iteration approaches the fixed point from below
    re = ref_error(eps);
    b.directivity_bound[i] = eps;
    b.reference_error_low_db[i] = re.low_db;
    b.reference_error_high_db[i] = re.high_db;
  }
  if (uncovered > 0) {
    warnings.push_back(fmt::format(
        "calibration kit {} does not specify its LOAD at {} and above ({} points): the bounds there assume nothing "
        "about the LOAD and are very wide",
        kit.identity, format_mhz(uncovered_at), uncovered));
  }
  return b;
}

double reading_sigma_db(const UncertaintyBudget& b, std::size_t index, double raw_dbm) {
  const SegmentNoise* seg = nullptr;
  const double f = index < b.frequency_hz.size() ? b.frequency_hz[index] : 0;
  for (const SegmentNoise& s : b.noise) {
    seg = &s;
    if (f <= s.stop_hz + 1e-3) break;
  }
  if (!seg) return 0.1;
  const double hi2 = seg->high_level_db * seg->high_level_db;
  // Additive noise: σ² = hi² + b²·10^(−P/10). b² from the LOAD's excess variance, or from the
  // receiver floor N (σ_add = 20log10(e)·sqrt(N/(2P)) for a tone in complex Gaussian noise,
  // first order; common practice, no source), whichever is larger.
  const double excess = std::max(0.0, seg->load_level_db * seg->load_level_db - hi2);
  const double b2_measured = excess * std::pow(10.0, seg->load_level_dbm / 10);
  const double b2_floor = kDbPerNeper * kDbPerNeper / 2 * std::pow(10.0, b.noise_floor_dbm / 10);
  const double add = std::max(b2_measured, b2_floor) * std::pow(10.0, -raw_dbm / 10);
  return std::sqrt(hi2 + add);
}

namespace {
struct GammaInterval {
  double measured = 0, low = 0, high = 0;
  bool clamped = false;
};

GammaInterval gamma_interval(const UncertaintyBudget& b, std::size_t i, double reference_dbm, double raw_dbm,
                             double offset_db, double offset_sigma_db) {
  GammaInterval g;
  const double rl = reference_dbm - raw_dbm;
  g.clamped = rl < 0;
  g.measured = amp(-std::max(rl, 0.0));
  const double k = b.coverage_factor;
  const double u_d = reading_sigma_db(b, i, raw_dbm);
  const double u_r = b.reference_noise_db[i];
  const double big_u = k * std::sqrt(u_d * u_d + u_r * u_r + offset_sigma_db * offset_sigma_db);
  // |E_D + Γ'| = 10^((P − T)/20), P − T = −RL + (R − T) ± U.
  // The fast-capture frequency offset is bounded: added to the reference's bounded error.
  const double m_low = amp(-rl + b.reference_error_low_db[i] - offset_db - big_u);
  const double m_high = amp(-rl + b.reference_error_high_db[i] + offset_db + big_u);
  const double e = b.directivity_bound[i] + k * b.connection;
  const double gp_low = std::max(0.0, m_low - e);
  const double gp_high = m_high + e;
  // Γ = Γ'/(1 + E_SΓ'): |Γ| ∈ [|Γ'|/(1 + σ_S|Γ'|), |Γ'|/(1 − σ_S|Γ'|)].
  const double s = b.source_match;
  g.low = gp_low / (1 + s * gp_low);
  g.high = s * gp_high < 1 ? gp_high / (1 - s * gp_high) : 1.0;
  g.high = std::min(g.high, 1.0);
  g.low = std::min(g.low, 1.0);
  return g;
}
}  // namespace

ReturnLossBounds budget_bounds(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm,
                               double offset_db, double offset_sigma_db) {
  const GammaInterval g = gamma_interval(b, index, reference_dbm, raw_dbm, offset_db, offset_sigma_db);
  ReturnLossBounds r;
  r.clamped = g.clamped;
  r.worst_db = g.high >= 1 ? 0.0 : -db_of_amp(g.high);
  r.best_db = g.low > 0 ? -db_of_amp(g.low) : kInf;
  return r;
}

double gamma_error_radius(const UncertaintyBudget& b, std::size_t index, double reference_dbm, double raw_dbm,
                          double offset_db, double offset_sigma_db) {
  const GammaInterval g = gamma_interval(b, index, reference_dbm, raw_dbm, offset_db, offset_sigma_db);
  return std::max(g.high - g.measured, g.measured - g.low);
}

std::vector<BudgetTerm> budget_terms(const UncertaintyBudget& b, std::size_t i, double reference_dbm, double raw_dbm,
                                     double offset_db) {
  std::vector<BudgetTerm> t;
  if (i >= b.frequency_hz.size()) return t;
  const double s = b.load_residual[i] / (1 - b.source_match * b.load_residual[i]);
  t.push_back({"directivity from the LOAD reading", "bounded", b.directivity_measured[i], "|Γ|"});
  t.push_back({"LOAD residual reflection (kit)", "bounded", s, "|Γ|"});
  // A point whose vector was not solved has bound 1 (nothing known): no mismatch term there.
  if (i < b.directivity_bound_from_load.size() && b.has_directivity_vector() && b.directivity_vector_bound[i] < 1) {
    t.push_back({"directivity bound from the LOAD (2)", "bounded", b.directivity_bound_from_load[i], "|Γ|"});
    t.push_back({"directivity bound from the mismatches (|d̂| + r_d)", "bounded",
                 std::hypot(b.directivity_re[i], b.directivity_im[i]) + b.directivity_vector_bound[i], "|Γ|"});
  }
  t.push_back({"directivity bound used", "bounded", b.directivity_bound[i], "|Γ|"});
  t.push_back({"source match", "bounded", b.source_match, "|Γ|"});
  t.push_back({"reference low (standards' loss and ripple)", "bounded", b.reference_error_low_db[i], "dB"});
  t.push_back({"reference high (ripple)", "bounded", b.reference_error_high_db[i], "dB"});
  if (b.frequency_offset_hz > 0) {
    t.push_back({"frequency offset (fast capture, the offset bound x the trace's slope)", "bounded", offset_db, "dB"});
  }
  t.push_back({"reading noise at this level", "statistical", reading_sigma_db(b, i, raw_dbm), "dB"});
  t.push_back({"reference noise", "statistical", b.reference_noise_db[i], "dB"});
  t.push_back({"connection repeatability (kit)", "statistical", b.connection, "|Γ|"});
  t.push_back({"coverage factor k", "statistical", b.coverage_factor, ""});
  (void)reference_dbm;
  return t;
}

}  // namespace echoline::core
