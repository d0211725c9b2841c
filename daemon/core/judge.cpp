// Raw readings to verdict (judge.hpp): calibrate, analyse, decide, advise.
#include "daemon/core/judge.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "daemon/core/analysis.hpp"
#include "daemon/core/decision.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/offset_pair_points.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/trim.hpp"

namespace echoline::core {
namespace {

Judgement aborted(std::string reason) {
  Judgement j;
  j.verdict = Verdict::aborted;
  j.reason = std::move(reason);
  return j;
}

// "" when the readings fit the calibration point for point.
std::string mismatch(const CalibrationRecord& cal, const std::vector<Reading>& dut) {
  const std::size_t n = cal.reference_dbm.size();
  if (dut.empty()) return "no readings";
  if (dut.size() != n || cal.directivity_db.size() != n) {
    return fmt::format("{} readings but the calibration has {} points", dut.size(), n);
  }
  auto open = cal.traces.find("OPEN");
  for (std::size_t i = 0; i < n; ++i) {
    if (!std::isfinite(dut[i].raw_dbm)) return fmt::format("the reading at {} is not a number", format_mhz(dut[i].frequency_hz));
    if (open != cal.traces.end() && open->second.size() == n) {
      const double f = open->second[i].frequency_hz;
      if (std::fabs(f - dut[i].frequency_hz) > std::max(1.0, 1e-9 * f)) {
        return fmt::format("reading {} is at {} but the calibration point is at {}", i,
                           format_frequency(dut[i].frequency_hz, 6), format_frequency(f, 6));
      }
    }
  }
  return "";
}

}  // namespace

Judgement judge(const Recipe& recipe, const CalibrationRecord& cal, const std::vector<Reading>& dut,
                const JudgeOptions& options, const std::vector<Reading>& offset) {
  if (!cal.valid) return aborted(fmt::format("calibration {} is not valid; calibrate again", cal.id));
  if (cal.budget.frequency_hz.size() != cal.reference_dbm.size()) {
    return aborted(fmt::format("calibration {} has no uncertainty budget (made by an older version); calibrate again",
                               cal.id));
  }
  if (std::string why = mismatch(cal, dut); !why.empty()) {
    return aborted(fmt::format("readings do not match calibration {}: {}", cal.id, why));
  }

  const std::vector<Reading>* pair = nullptr;
  if (recipe.offset_pair) {
    if (!cal.budget.offset_line) {
      return aborted(fmt::format("the recipe reads each unit through the offset line too, but calibration {} holds no "
                                 "offset line (its kit defined none, or its recipe did not use the pair); calibrate "
                                 "again",
                                 cal.id));
    }
    if (std::string why = mismatch(cal, offset); !why.empty()) {
      return aborted(fmt::format("the reading through the offset line does not match calibration {}: {}", cal.id, why));
    }
    pair = &offset;
  }
  // The second reading the same as the first: the line was not in place. The direct reading's
  // bounds hold on their own; the pair's would not (MEASUREMENT.md §12).
  double same_rms_db = 0, same_noise_db = 0;
  const bool same = pair && offset_reading_is_direct(cal.budget, dut, offset, &same_rms_db, &same_noise_db);
  if (same) pair = nullptr;
  CalibratedTrace trace = calibrate_points(cal, dut, pair);
  // Where the two readings disagree beyond both bounds the pair's model failed (the line is not
  // what the kit states, or the unit changed between the readings): the unit is judged on the
  // direct reading alone, and may not pass (below).
  const std::size_t disagreements = trace.pair_disagreements;
  if (disagreements > 0) {
    pair = nullptr;
    trace = calibrate_points(cal, dut);
  }
  trace.shift.fit = options.fit;
  const Analysis analysis = analyze(recipe, trace);
  Decision decision = decide(recipe, trace.points, analysis);
  if (decision.verdict == Verdict::inconclusive) {
    // The bench's systematic interval alone: the same readings with the statistical terms left
    // out (reading and reference noise, the unit's connection), to tell whether a retest could
    // settle the unit.
    CalibrationRecord quiet = cal;
    for (SegmentNoise& s : quiet.budget.noise) {
      s.high_level_db = s.load_level_db = 0;
      s.measured = true;
    }
    std::fill(quiet.budget.reference_noise_db.begin(), quiet.budget.reference_noise_db.end(), 0.0);
    quiet.budget.noise_floor_dbm = -400;
    // The unit's own connection is statistical too (a retest reconnects it); the LOAD's stays in
    // the calibration's directivity bound, fixed for this calibration.
    quiet.budget.connection = 0;
    // The pair keeps the leakage's bounds of the real budget, as the directivity bound is kept.
    const std::vector<PointResult> noise_free = calibrate_points(quiet, dut, pair, &cal.budget).points;
    decision = decide(recipe, trace.points, analysis, &noise_free);
  }

  Judgement j;
  j.points = std::move(trace.points);
  j.verdict = decision.verdict;
  j.failure_class = decision.failure_class;
  j.reason = decision.reason;
  if (recipe.offset_pair) {
    for (std::size_t i = 0; i < j.points.size() && i < offset.size(); ++i) j.points[i].offset_raw_dbm = offset[i].raw_dbm;
  }
  if (disagreements > 0) {
    const std::string note = fmt::format(
        "the reading through the offset line disagrees with the direct one beyond both bounds at {} point(s), so the "
        "unit was judged on the direct reading alone: check the line against the kit and the unit's connection",
        disagreements);
    if (j.verdict == Verdict::pass) {
      j.verdict = Verdict::inconclusive;
      j.reason = note + "; hold the unit for review";
    } else {
      j.reason += " (" + note + ")";
    }
  }
  if (same) {
    const std::string note = fmt::format(
        "the reading through the offset line is the direct one again (RMS difference {:.3f} dB, noise {:.3f} dB): the "
        "line was not in place, so the unit was judged on the direct reading alone; fit the line when asked, and take "
        "it off before the next unit",
        same_rms_db, same_noise_db);
    j.reason = j.reason.empty() ? note : j.reason + " (" + note + ")";
  }
  if (analysis.clamped_points > 0) {
    j.reason += fmt::format(" ({} reading(s) above the OPEN/SHORT reference were taken as total reflection)",
                            analysis.clamped_points);
  }

  Metrics& m = j.metrics;
  m.directivity_db = cal.min_directivity_db;
  if (analysis.resonance) {
    m.resonance_hz = analysis.resonance->frequency_hz;
    m.depth_db = analysis.resonance->depth_db;
    m.vswr_at_resonance = vswr_from_return_loss(m.depth_db);
    m.mismatch_loss_db = mismatch_loss_from_return_loss(m.depth_db);
    if (!analysis.resonance->low_open) m.resonance_low_hz = analysis.resonance->low_hz;
    if (!analysis.resonance->high_open) m.resonance_high_hz = analysis.resonance->high_hz;
    const Resonance& r = *analysis.resonance;
    m.resonance_interval_kind = r.fit_used          ? "fit"
                                : r.pair_bound_used ? "offset-pair"
                                : r.shift_bound_used ? "shift-bound"
                                                     : "rigorous";
    if (!r.rigorous_low_open) m.rigorous_low_hz = r.rigorous_low_hz;
    if (!r.rigorous_high_open) m.rigorous_high_hz = r.rigorous_high_hz;
  }
  if (analysis.fit) {
    const DipFit& f = *analysis.fit;
    m.fit_refused = f.refused;
    if (f.used) {
      m.fit_model = to_string(f.models[f.best].model);
      m.fit_resonance_hz = f.resonance_hz;
      m.fit_depth_db = f.depth_db;
      m.fit_depth_low_db = f.depth_low_db;
      m.fit_depth_high_db = f.depth_high_db;
      m.fit_bandwidth_hz = f.bandwidth_hz;
      m.fit_bandwidth_low_hz = f.bandwidth_low_hz;
      m.fit_bandwidth_high_hz = f.bandwidth_high_hz;
    }
  }
  if (analysis.band) {
    m.bandwidth_hz = analysis.band->width_hz();
    m.band_low_hz = analysis.band->low_hz;
    m.band_high_hz = analysis.band->high_hz;
  }
  m.min_margin_db = 0;
  bool first = true;
  for (const SegmentMargin& s : analysis.margins) {
    if (s.point_count == 0) continue;
    if (first || s.measured_db < m.min_margin_db) m.min_margin_db = s.measured_db;
    first = false;
  }

  // Trim advice only when the tuning is what is wrong: the unit failed as tuned-low or
  // tuned-high, which decision.cpp gives only when the whole resonance interval lies outside
  // the window (or the band). An undecided or mismatched unit gets none.
  if (recipe.trim && analysis.resonance && j.verdict == Verdict::fail && decision.tuning_certain &&
      (j.failure_class == FailureClass::tuned_low || j.failure_class == FailureClass::tuned_high)) {
    j.trim = trim_advice(*recipe.trim, analysis.resonance->frequency_hz, analysis.resonance->at_edge);
  }
  return j;
}

}  // namespace echoline::core
