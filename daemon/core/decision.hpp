// Conformity decisions (JCGM 106:2012 §8 simple / guarded acceptance; ILAC-G8:09/2019 §4.2)
// for a calibrated trace, the failure class and the plain-words reason for the operator.
// Pure; thread-safe.
#pragma once

#include <string>
#include <vector>

#include "daemon/core/analysis.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// A lower limit (value >= limit passes) judged from a measured value and its interval
// [worst, best] (worst <= measured <= best).
//   simple:  pass when measured >= limit, else fail (the acceptance interval is the tolerance
//            interval, JCGM 106 §8.2 / ILAC-G8 §4.2.1).
//   guarded: pass when worst >= limit; fail when best < limit; inconclusive otherwise
//            (guarded acceptance with the guard band equal to the full worst-case interval,
//            JCGM 106 §8.3.2; the in-between zone is ILAC-G8 §4.2.3's conditional zone).
Verdict decide_lower_limit(DecisionRule rule, double measured, double worst, double best, double limit);

// A value that must lie in [min, max], known to lie in [low, high] (low <= measured <= high).
//   simple:  pass when min <= measured <= max.
//   guarded: pass when [low, high] ⊂ [min, max]; fail when they do not overlap; else inconclusive.
Verdict decide_window(DecisionRule rule, double measured, double low, double high, double min, double max);

// fail beats inconclusive beats pass (aborted beats everything).
Verdict combine(Verdict a, Verdict b);

// One limit's outcome.
struct LimitCheck {
  std::string kind;        // "mask" | "resonance" | "bandwidth"
  Verdict verdict = Verdict::pass;
  std::string detail;      // plain words, e.g. "return loss 8.3 dB at 902.0 MHz is below the 10 dB limit over 902–928 MHz"
};

struct Decision {
  Verdict verdict = Verdict::pass;
  FailureClass failure_class = FailureClass::none;
  std::string reason;
  std::vector<LimitCheck> checks;
  // The whole resonance interval lies outside the window (or the mask's band): the tuning is
  // certainly what is wrong, so trim advice may be given.
  bool tuning_certain = false;
};

// No-response threshold: best RL over the whole sweep below this reflects like an open or short.
inline constexpr double kNoResponseReturnLossDb = 3.0;
// An erratic trace (intermittent feed): this many jumps of more than kErraticJumpDb between
// neighbouring points. A smooth dip, however sharp, changes by far less per point step
// (common practice, no source; a 201-point sweep of a Q-10 dip moves under 3 dB per step).
inline constexpr int kErraticJumps = 3;
inline constexpr double kErraticJumpDb = 6.0;

// Applies the recipe's rule to the mask (per point), the resonance window and the minimum
// bandwidth, then classifies a failure from the intervals (daemon/core/MEASUREMENT.md, "Diagnosis"):
//   no-response  best measured RL under 3 dB everywhere, or an erratic trace (intermittent feed);
//   tuned-low/-high  a window failed; or the mask failed and the whole resonance interval lies
//                below/above the mask's band (certain: trim advice); or the mask failed with a
//                well-formed dip (depth at least the limit, interval not spanning the whole
//                band) whose measured resonance lies outside the band (no trim advice);
//   shallow      the mask failed and the dip is too shallow to meet the limit or too broad to
//                place (its interval, open sides reaching beyond the sweep, spans the band);
//   out-of-mask  anything else that failed.
// noise_free: the same points with their bounds computed without the statistical terms (the
// bench's systematic interval alone), when the caller has them. An inconclusive unit whose
// undecided limits are all masks that stay undecided without noise cannot be settled by a
// retest on this bench, and its reason says so (kRetestCannotSettle).
Decision decide(const Recipe& recipe, const std::vector<PointResult>& points, const Analysis& analysis,
                const std::vector<PointResult>* noise_free = nullptr);

// The words an inconclusive reason carries when no retest on this bench can settle the unit.
inline constexpr const char* kRetestCannotSettle = "a retest on this bench cannot settle it";
// In the reason of a trace that jumps between full reflection and a dip (an intermittent feed or
// a loose connection): class no-response, and the console asks for one reseat before the reject.
inline constexpr const char* kIntermittentTrace = "the trace jumps between full reflection and a dip";
// How the reason of a run the instruments stopped begins (timeout, dropped link, garbled reply,
// the instrument's own error); the driver's message naming instrument, command and reply follows.
inline constexpr const char* kInstrumentTroublePrefix = "instrument trouble: ";

}  // namespace echoline::core
