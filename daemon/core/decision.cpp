// Decisions, failure classes and reasons (decision.hpp).
// Terms: JCGM 106:2012 §8.2 simple acceptance, §8.3.2 guarded acceptance; ILAC-G8:09/2019 §4.2.1
// binary statement for simple acceptance, §4.2.3 non-binary statement (our "inconclusive" is the
// conditional pass / conditional fail zone). The guard band here is the full worst-case interval
// from the uncertainty budget (MEASUREMENT.md §3.6), not a symmetric ±U.
#include "daemon/core/decision.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();
constexpr double kEdgeToleranceHz = kLimitEdgeToleranceHz;

std::string db_text(double v) {
  if (std::isinf(v)) return v > 0 ? "+inf dB" : "-inf dB";
  return fmt::format("{:.1f} dB", v);
}

// A limit as written, trailing zeros removed: "10 dB", "9.54 dB".
std::string limit_text(double v) {
  std::string s = fmt::format("{:.2f}", v);
  while (!s.empty() && s.back() == '0') s.pop_back();
  if (!s.empty() && s.back() == '.') s.pop_back();
  return s + " dB";
}

std::string bandwidth_text(double hz) { return fmt::format("{:.2f} MHz", hz / 1e6); }

bool inside(double f, const LimitSegment& s) {
  return f >= s.start_hz - kEdgeToleranceHz && f <= s.stop_hz + kEdgeToleranceHz;
}

// Mask: per point, then the point that explains the segment's outcome.
LimitCheck check_mask(DecisionRule rule, const std::vector<PointResult>& points, const LimitSegment& seg) {
  LimitCheck c;
  c.kind = "mask";
  const std::string where = "over " + format_frequency_range(seg.start_hz, seg.stop_hz);
  const double lim = seg.min_return_loss_db;
  const PointResult* fail_at = nullptr;     // smallest margin of the value that decides a fail
  const PointResult* incon_at = nullptr;    // smallest worst-case margin among inconclusive points
  const PointResult* tightest = nullptr;    // smallest margin (measured or worst) overall
  std::size_t count = 0;
  Verdict v = Verdict::pass;
  const bool guarded = rule == DecisionRule::guarded;
  for (const PointResult& p : points) {
    if (!inside(p.frequency_hz, seg)) continue;
    ++count;
    const Verdict pv = decide_lower_limit(rule, p.return_loss_db, p.return_loss_worst_db, p.return_loss_best_db, lim);
    v = combine(v, pv);
    const double decisive = guarded ? p.return_loss_best_db : p.return_loss_db;
    if (pv == Verdict::fail &&
        (!fail_at || decisive < (guarded ? fail_at->return_loss_best_db : fail_at->return_loss_db))) {
      fail_at = &p;
    }
    if (pv == Verdict::inconclusive && (!incon_at || p.return_loss_worst_db < incon_at->return_loss_worst_db)) {
      incon_at = &p;
    }
    const double m = guarded ? p.return_loss_worst_db : p.return_loss_db;
    if (!tightest || m < (guarded ? tightest->return_loss_worst_db : tightest->return_loss_db)) tightest = &p;
  }
  if (count == 0) {
    c.verdict = Verdict::inconclusive;
    c.detail = fmt::format("no measured point {}: the {} limit could not be checked", where, limit_text(lim));
    return c;
  }
  c.verdict = v;
  if (v == Verdict::fail) {
    c.detail = fmt::format("return loss {} at {} is below the {} limit {}", db_text(fail_at->return_loss_db),
                           format_mhz(fail_at->frequency_hz), limit_text(lim), where);
    if (guarded) c.detail += fmt::format(" (at best {})", db_text(fail_at->return_loss_best_db));
  } else if (v == Verdict::inconclusive) {
    c.detail = fmt::format(
        "return loss {} at {} is within the measurement uncertainty of the {} limit {} (true value {} to {})",
        db_text(incon_at->return_loss_db), format_mhz(incon_at->frequency_hz), limit_text(lim), where,
        db_text(incon_at->return_loss_worst_db), db_text(incon_at->return_loss_best_db));
  } else {
    const double m = (guarded ? tightest->return_loss_worst_db : tightest->return_loss_db) - lim;
    c.detail = fmt::format("{}margin {} at {} for the {} limit {}", guarded ? "worst-case " : "", db_text(m),
                           format_mhz(tightest->frequency_hz), limit_text(lim), where);
  }
  return c;
}

// The interval the true resonance lies in, in words: "anywhere in 921.8–926.9 MHz", "anywhere
// below 906.2 MHz, down to and beyond the sweep start at 860.0 MHz".
std::string interval_text(const Resonance& r) {
  if (r.low_open && r.high_open) {
    return fmt::format("anywhere in the sweep ({:.1f}\u2013{:.1f} MHz) or beyond it", r.low_hz / 1e6, r.high_hz / 1e6);
  }
  if (r.low_open) return fmt::format("anywhere below {}, down to and beyond the sweep start at {}", format_mhz(r.high_hz), format_mhz(r.low_hz));
  if (r.high_open) return fmt::format("anywhere above {}, up to and beyond the sweep end at {}", format_mhz(r.low_hz), format_mhz(r.high_hz));
  return fmt::format("anywhere in {:.1f}\u2013{:.1f} MHz", r.low_hz / 1e6, r.high_hz / 1e6);
}

// Resonance window.
//   simple:  the measured (parabola-refined) resonance against the window (JCGM 106 §8.2).
//   guarded: the bound interval of the true resonance (analysis.cpp, resonance_interval: from
//            the bounds of MEASUREMENT.md §3.6) must lie wholly inside the window to
//            pass, wholly outside to fail; otherwise inconclusive (JCGM 106:2012 §8.3.2 guarded
//            acceptance, ILAC-G8 §4.2.3 conditional zone; clause numbers from memory).
// A half-step interval was used here before; it ignored the directivity error, whose phase
// turns with frequency and tilts the measured curve, moving the apparent peak by megahertz.
LimitCheck check_window(DecisionRule rule, const Recipe& recipe, const Analysis& a) {
  LimitCheck c;
  c.kind = "resonance";
  const double lo = *recipe.limits.resonance_min_hz;
  const double hi = *recipe.limits.resonance_max_hz;
  const std::string window = format_frequency_range(lo, hi);
  if (!a.resonance) {
    c.verdict = Verdict::fail;
    c.detail = fmt::format("no resonance found for the {} window", window);
    return c;
  }
  const Resonance& r = *a.resonance;
  const double low = r.low_open ? -kInf : r.low_hz;
  const double high = r.high_open ? kInf : r.high_hz;
  c.verdict = decide_window(rule, r.frequency_hz, low, high, lo, hi);
  const bool guarded = rule == DecisionRule::guarded;
  const std::string at = format_mhz(r.frequency_hz);
  const std::string where = interval_text(r);
  if (c.verdict == Verdict::pass) {
    c.detail = fmt::format("resonance at {} is inside the {} window", at, window);
    if (guarded) c.detail += fmt::format(" (within the measurement's uncertainty it lies {})", where);
  } else if (c.verdict == Verdict::inconclusive) {
    const bool crosses_low = low < lo;
    const bool crosses_high = high > hi;
    const char* edge = crosses_low && crosses_high ? "both edges" : "the edge";
    c.detail = fmt::format("resonance {}, but within the measurement's uncertainty it may lie {}, which crosses {} of the {} "
                           "window",
                           at, where, edge, window);
  } else if (r.frequency_hz < lo) {
    c.detail = fmt::format("resonance at {} is below the {} window (element too long)", at, window);
    if (guarded) c.detail += fmt::format("; within the measurement's uncertainty it lies {}", where);
  } else {
    c.detail = fmt::format("resonance at {} is above the {} window (element too short)", at, window);
    if (guarded) c.detail += fmt::format("; within the measurement's uncertainty it lies {}", where);
  }
  if (r.at_edge) c.detail += "; the maximum is on the sweep edge, so the resonance may lie outside the sweep";
  return c;
}

double band_width(const std::optional<Band>& b, bool open_means_unbounded) {
  if (!b) return 0;
  if (open_means_unbounded && (b->low_open || b->high_open)) return kInf;
  return b->width_hz();
}

LimitCheck check_bandwidth(DecisionRule rule, const Recipe& recipe, const Analysis& a) {
  LimitCheck c;
  c.kind = "bandwidth";
  const double min_bw = *recipe.limits.min_bandwidth_hz;
  const double thr = recipe.limits.bandwidth_threshold_db;
  const double measured = band_width(a.band, false);
  const double worst = band_width(a.band_worst, false);  // an open edge: still a lower bound
  const double best = band_width(a.band_best, true);     // an open edge: could be wider
  c.verdict = decide_lower_limit(rule, measured, std::min(worst, measured), std::max(best, measured), min_bw);
  const std::string head = fmt::format("bandwidth {} (return loss \u2265 {})", bandwidth_text(measured), limit_text(thr));
  if (c.verdict == Verdict::pass) {
    c.detail = fmt::format("{} meets the {} minimum", head, bandwidth_text(min_bw));
  } else if (c.verdict == Verdict::inconclusive) {
    c.detail = fmt::format("{} is within the measurement uncertainty of the {} minimum (true {} to {})", head,
                           bandwidth_text(min_bw), bandwidth_text(worst),
                           std::isinf(best) ? std::string("unbounded") : bandwidth_text(best));
  } else {
    c.detail = fmt::format("{} is below the {} minimum", head, bandwidth_text(min_bw));
  }
  if (a.band && (a.band->low_open || a.band->high_open)) c.detail += " (band reaches the sweep edge)";
  return c;
}

// The strictest mask limit at frequency f (or over the whole mask when f is in no segment).
double limit_at(const std::vector<LimitSegment>& mask, double f) {
  double lim = -kInf;
  for (const LimitSegment& s : mask) {
    if (inside(f, s)) lim = std::max(lim, s.min_return_loss_db);
  }
  if (std::isinf(lim)) {
    for (const LimitSegment& s : mask) lim = std::max(lim, s.min_return_loss_db);
  }
  return lim;
}

// The band the tuning is judged against: the span of the segments with the strictest limit
// (the band itself, not the looser shoulders beside it).
std::pair<double, double> mask_span(const std::vector<LimitSegment>& mask) {
  double strictest = -kInf;
  for (const LimitSegment& s : mask) strictest = std::max(strictest, s.min_return_loss_db);
  double lo = kInf, hi = -kInf;
  for (const LimitSegment& s : mask) {
    if (s.min_return_loss_db < strictest) continue;
    lo = std::min(lo, s.start_hz);
    hi = std::max(hi, s.stop_hz);
  }
  return {lo, hi};
}

void classify(const Recipe& recipe, const std::vector<PointResult>& points, const Analysis& a, Decision& d) {
  const auto first_failed = [&](const char* kind) -> const LimitCheck* {
    for (const LimitCheck& c : d.checks) {
      if (c.kind == kind && c.verdict == Verdict::fail) return &c;
    }
    return nullptr;
  };
  if (a.max_return_loss_db < kNoResponseReturnLossDb || !a.resonance) {
    d.failure_class = FailureClass::no_response;
    d.reason = fmt::format(
        "no dip anywhere: feed broken or element not connected (best return loss {} over {}, reflects like an "
        "open or a short)",
        db_text(a.max_return_loss_db),
        points.empty() ? std::string("the sweep")
                       : format_frequency_range(points.front().frequency_hz, points.back().frequency_hz));
    return;
  }
  if (a.erratic_jumps >= kErraticJumps) {
    // A feed that makes and breaks contact between readings: some points reflect like an open,
    // the rest like the antenna. No resonance or trim can be read from such a trace.
    d.failure_class = FailureClass::no_response;
    d.reason = fmt::format(
        "{} ({} jumps of more than {:.0f} dB between neighbouring points): an intermittent feed or a loose "
        "connection; check the feed and the connector, then retest",
        kIntermittentTrace, a.erratic_jumps, kErraticJumpDb);
    return;
  }
  const Resonance& r = *a.resonance;
  // Whole interval below / above [lo, hi]: an open side reaching beyond lo/hi does not count.
  const auto wholly_below = [&](double lo) { return !r.high_open && r.high_hz < lo; };
  const auto wholly_above = [&](double hi) { return !r.low_open && r.low_hz > hi; };
  if (const LimitCheck* w = first_failed("resonance")) {
    const double lo = *recipe.limits.resonance_min_hz, hi = *recipe.limits.resonance_max_hz;
    const bool low = r.frequency_hz < lo;
    d.failure_class = low ? FailureClass::tuned_low : FailureClass::tuned_high;
    d.tuning_certain = low ? wholly_below(lo) : wholly_above(hi);
    d.reason = w->detail;
    if (!d.tuning_certain) d.reason += "; the resonance interval reaches into the window, so no trim advice";
    return;
  }
  const LimitCheck* mask = first_failed("mask");
  if (mask && !recipe.limits.mask.empty()) {
    const auto [lo, hi] = mask_span(recipe.limits.mask);
    const auto tuned = [&](bool low, bool certain) {
      d.failure_class = low ? FailureClass::tuned_low : FailureClass::tuned_high;
      d.tuning_certain = certain;
      d.reason = fmt::format("resonance at {} is {} the {} band ({}); {}", format_mhz(r.frequency_hz),
                             low ? "below" : "above", format_frequency_range(lo, hi),
                             low ? "element too long" : "element too short", mask->detail);
      if (!certain) {
        d.reason += fmt::format("; with the measurement uncertainty the resonance lies {}, which reaches into the band, "
                                "so no trim advice",
                                interval_text(r));
      }
    };
    // The whole interval outside the band: the tuning is what is wrong, whatever the depth
    // (a dip beyond the sweep edge shows only its skirt).
    if (wholly_below(lo)) return tuned(true, true);
    if (wholly_above(hi)) return tuned(false, true);
    // Placeable: the interval does not span the whole band (an open side counts as reaching
    // beyond the sweep), so the dip's position relative to the band is known.
    const double reach_low = r.low_open ? -kInf : r.low_hz;
    const double reach_high = r.high_open ? kInf : r.high_hz;
    const bool placeable = !(reach_low <= lo && reach_high >= hi);
    const double lim = limit_at(recipe.limits.mask, r.frequency_hz);
    // The maximum on the sweep's first or last point: the dip lies at or beyond the sweep edge,
    // so its full depth is not seen. The tuning is what shows when the interval can place the
    // dip (certain only when the whole interval lies outside the band), or when the edge
    // already reads as deep as the limit: a working element, only off frequency. Otherwise the
    // trace is a slope that nowhere meets the limit with its top at the edge; a lossy element
    // looks so as much as one tuned far off, and only a wider sweep tells them apart.
    if (r.at_edge) {
      const bool low = r.index == 0;
      if (placeable || r.depth_db >= lim) return tuned(low, low ? wholly_below(lo) : wholly_above(hi));
      d.failure_class = FailureClass::shallow;
      d.reason = fmt::format(
          "the dip is too broad to place: its top is at the sweep edge ({}, {}, below the {} limit) and with the "
          "measurement uncertainty the resonance lies {}; {}; a lossy or damaged element or a poor match (check the "
          "feed, the solder joint and the ground connection), or a dip far beyond the sweep edge (a wider sweep tells "
          "them apart); no trim advice",
          format_mhz(r.frequency_hz), db_text(r.depth_db), limit_text(lim), interval_text(r), mask->detail);
      return;
    }
    const bool deep = r.depth_db >= lim;
    if (!placeable || !deep) {
      d.failure_class = FailureClass::shallow;
      if (!deep) {
        d.reason = fmt::format(
            "dip at {} reaches only {} return loss, below the {} limit (poor match: check the feed, the solder joint, "
            "the ground connection and the element for corrosion)",
            format_mhz(r.frequency_hz), db_text(r.depth_db), limit_text(lim));
      } else {
        d.reason = fmt::format(
            "the dip is too broad to place ({}): {}; a lossy or damaged element, or a poor match (check the feed, the "
            "solder joint and the ground connection)",
            interval_text(r), mask->detail);
      }
      return;
    }
    // A well-formed dip whose measured resonance lies outside the band, its interval reaching
    // in: the likely cause is the tuning, but not certain enough for trim advice.
    if (r.frequency_hz < lo || r.frequency_hz > hi) return tuned(r.frequency_hz < lo, false);
  }
  d.failure_class = FailureClass::out_of_mask;
  if (mask) d.reason = mask->detail;
  else if (const LimitCheck* bw = first_failed("bandwidth")) d.reason = bw->detail;
  else d.reason = "a limit was not met";
}

}  // namespace

Verdict decide_lower_limit(DecisionRule rule, double measured, double worst, double best, double limit) {
  if (rule == DecisionRule::simple) {
    // JCGM 106 §8.2 simple acceptance: acceptance limit = tolerance limit; on the limit passes.
    return measured >= limit ? Verdict::pass : Verdict::fail;
  }
  // JCGM 106 §8.3.2 guarded acceptance; the in-between zone is ILAC-G8 §4.2.3's conditional zone.
  if (worst >= limit) return Verdict::pass;
  if (best < limit) return Verdict::fail;
  return Verdict::inconclusive;
}

Verdict decide_window(DecisionRule rule, double measured, double low, double high, double min, double max) {
  if (rule == DecisionRule::simple) return measured >= min && measured <= max ? Verdict::pass : Verdict::fail;
  if (low >= min && high <= max) return Verdict::pass;
  if (high < min || low > max) return Verdict::fail;
  return Verdict::inconclusive;
}

Verdict combine(Verdict a, Verdict b) {
  auto rank = [](Verdict v) {
    switch (v) {
      case Verdict::pass: return 0;
      case Verdict::inconclusive: return 1;
      case Verdict::fail: return 2;
      case Verdict::aborted: return 3;
    }
    return 3;
  };
  return rank(a) >= rank(b) ? a : b;
}

Decision decide(const Recipe& recipe, const std::vector<PointResult>& points, const Analysis& analysis,
                const std::vector<PointResult>* noise_free) {
  Decision d;
  if (points.empty()) {
    d.verdict = Verdict::aborted;
    d.reason = "no readings to judge";
    return d;
  }
  for (const LimitSegment& seg : recipe.limits.mask) d.checks.push_back(check_mask(recipe.rule, points, seg));
  if (recipe.limits.resonance_min_hz && recipe.limits.resonance_max_hz) {
    d.checks.push_back(check_window(recipe.rule, recipe, analysis));
  }
  if (recipe.limits.min_bandwidth_hz) d.checks.push_back(check_bandwidth(recipe.rule, recipe, analysis));
  for (const LimitCheck& c : d.checks) d.verdict = combine(d.verdict, c.verdict);
  // A trace that never dips is a failure whatever the limits say.
  if (analysis.max_return_loss_db < kNoResponseReturnLossDb) d.verdict = Verdict::fail;

  if (d.verdict == Verdict::fail) {
    classify(recipe, points, analysis, d);
  } else if (d.verdict == Verdict::inconclusive) {
    std::string parts;
    for (const LimitCheck& c : d.checks) {
      if (c.verdict != Verdict::inconclusive) continue;
      if (!parts.empty()) parts += "; ";
      parts += c.detail;
    }
    // Systematic: every undecided limit is a mask segment that the bench's bounded terms alone
    // (directivity, standards, source match) leave undecided at the same readings. A retest reads
    // the same within the noise, which would have to move the reading by more than the
    // statistical part of the interval: the unit stays undecided.
    bool systematic = noise_free && noise_free->size() == points.size();
    std::size_t k = 0;
    for (const LimitSegment& seg : recipe.limits.mask) {
      if (!systematic) break;
      const LimitCheck& c = d.checks[k++];
      if (c.verdict != Verdict::inconclusive) continue;
      // A segment with no measured point is undecided for want of data, not by the bench.
      if (c.detail.rfind("no measured point", 0) == 0) {
        systematic = false;
        break;
      }
      systematic = check_mask(recipe.rule, *noise_free, seg).verdict == Verdict::inconclusive;
    }
    for (std::size_t i = k; i < d.checks.size() && systematic; ++i) systematic = d.checks[i].verdict != Verdict::inconclusive;
    d.reason = parts + (systematic ? fmt::format("; {}: the bench's bounded terms (coupler directivity, standards, source "
                                                 "match), not reading noise or the connection, leave it undecided; hold the "
                                                 "unit for review",
                                                 kRetestCannotSettle)
                                   : std::string(". Retest; if it stays inconclusive, hold the unit for review"));
  } else {
    const Resonance* r = analysis.resonance ? &*analysis.resonance : nullptr;
    d.reason = r ? fmt::format("resonance at {}, {} deep; every limit met", format_mhz(r->frequency_hz), db_text(r->depth_db))
                 : std::string("every limit met");
    for (const LimitCheck& c : d.checks) {
      if (c.kind == "mask") d.reason += "; " + c.detail;
    }
  }
  return d;
}

}  // namespace echoline::core
