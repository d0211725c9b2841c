// Window prediction against offline re-judging (window_score.hpp).
#include "tests/score/window_score.hpp"

#include <algorithm>
#include <cmath>
#include <limits>
#include <memory>

#include <fmt/format.h>

#include "daemon/core/calibration.hpp"
#include "daemon/core/centring_prediction.hpp"
#include "daemon/core/judge.hpp"
#include "daemon/core/uncertainty.hpp"
#include "tests/score/verdict_score.hpp"

namespace echoline::score {
namespace {

double median(std::vector<double> v) {
  std::sort(v.begin(), v.end());
  const std::size_t n = v.size();
  return n % 2 == 1 ? v[n / 2] : (v[n / 2 - 1] + v[n / 2]) / 2;
}

// The nominal unit's depth, where the recipe has that field (it came with the rigorous-interval
// prediction; without it the prediction assumes a deep dip).
template <class Nominal>
bool set_depth(Nominal& nominal, double depth_db) {
  if constexpr (requires { nominal.depth_db = std::optional<double>(depth_db); }) {
    nominal.depth_db = depth_db;
    return true;
  } else {
    return false;
  }
}

// The largest per-point error radius over the contiguous points within 6 dB of the deepest one
// (the points the daemon's shift bound fits), or nullopt without points.
std::optional<double> dip_error_radius(const core::CalibrationRecord& cal, const std::vector<core::PointResult>& pts) {
  if (pts.empty() || pts.size() != cal.reference_dbm.size() || pts.size() != cal.budget.frequency_hz.size()) {
    return std::nullopt;
  }
  std::size_t peak = 0;
  for (std::size_t i = 1; i < pts.size(); ++i) {
    if (pts[i].return_loss_db > pts[peak].return_loss_db) peak = i;
  }
  const double floor_db = pts[peak].return_loss_db - 6.0;
  std::size_t lo = peak, hi = peak;
  while (lo > 0 && pts[lo - 1].return_loss_db >= floor_db) --lo;
  while (hi + 1 < pts.size() && pts[hi + 1].return_loss_db >= floor_db) ++hi;
  double e = 0;
  for (std::size_t i = lo; i <= hi; ++i) {
    e = std::max(e, core::gamma_error_radius(cal.budget, i, cal.reference_dbm[i], pts[i].raw_dbm));
  }
  return e;
}

}  // namespace

ReferenceUnits reference_units(const std::vector<UnitRecord>& units) {
  ReferenceUnits r;
  std::vector<double> bw, depth, f0;
  for (const UnitRecord& u : units) {
    if (u.run.verdict != core::Verdict::pass) continue;
    ++r.count;
    const core::Metrics& m = u.run.metrics;
    if (m.bandwidth_hz) bw.push_back(*m.bandwidth_hz);
    depth.push_back(m.depth_db);
    if (m.resonance_hz) f0.push_back(*m.resonance_hz);
  }
  if (!bw.empty()) r.bandwidth_median_hz = median(bw);
  if (!depth.empty()) r.depth_median_db = median(depth);
  if (!f0.empty()) {
    double sum = 0;
    for (double f : f0) sum += f;
    const double mean = sum / static_cast<double>(f0.size());
    r.resonance_mean_hz = mean;
    if (f0.size() >= 2) {
      double ss = 0;
      for (double f : f0) ss += (f - mean) * (f - mean);
      r.resonance_sd_hz = std::sqrt(ss / static_cast<double>(f0.size() - 1));
    }
  }
  return r;
}

bool apply_reference(core::Recipe& window, const ReferenceUnits& reference) {
  core::NominalUnit& n = window.nominal;
  if (reference.bandwidth_median_hz) {
    n.q.reset();
    n.bandwidth_hz = reference.bandwidth_median_hz;
  }
  if (reference.resonance_sd_hz) n.resonance_sd_hz = reference.resonance_sd_hz;
  if (reference.resonance_mean_hz) n.center_hz = reference.resonance_mean_hz;
  return reference.depth_median_db && set_depth(n, *reference.depth_median_db);
}

std::optional<double> error_radius(const core::CalibrationRecord& cal, const core::Recipe& window) {
  double lo = std::numeric_limits<double>::infinity(), hi = -lo;
  for (const auto& s : window.limits.mask) {
    lo = std::min(lo, s.start_hz);
    hi = std::max(hi, s.stop_hz);
  }
  if (window.limits.mask.empty() && window.limits.resonance_min_hz && window.limits.resonance_max_hz) {
    lo = *window.limits.resonance_min_hz;
    hi = *window.limits.resonance_max_hz;
  }
  const core::UncertaintyBudget& b = cal.budget;
  std::vector<double> e;
  for (std::size_t i = 0; i < b.frequency_hz.size() && i < b.directivity_bound.size(); ++i) {
    if (b.frequency_hz[i] < lo - 1e-3 || b.frequency_hz[i] > hi + 1e-3) continue;
    e.push_back(b.directivity_bound[i] + window.coverage_factor * b.connection);
  }
  if (e.empty()) return std::nullopt;
  // The daemon's shift bound takes the largest radius over the points it fits (analysis.cpp),
  // so the prediction takes the largest over the band, not a typical value.
  return *std::max_element(e.begin(), e.end());
}

WindowFigures score_window(store::RunStore& store_copy, const std::vector<UnitRecord>& units, core::Recipe window,
                           const core::StationCapability& capability) {
  WindowFigures w;
  w.recipe_name = window.name;
  w.reference = reference_units(units);
  w.depth_applied = apply_reference(window, w.reference);

  std::map<std::string, std::unique_ptr<core::CalibrationRecord>> cals;
  std::map<std::string, int> runs_per_cal;
  std::vector<double> half_widths, dip_radii, fit_hw, fit_rig_hw, rig_hw;
  for (const UnitRecord& u : units) {
    const core::RunResult& run = u.run;
    if (run.verdict == core::Verdict::aborted) continue;
    auto it = cals.find(run.calibration_id);
    if (it == cals.end()) {
      auto loaded = store_copy.load_calibration(run.calibration_id);
      std::unique_ptr<core::CalibrationRecord> cal;
      if (!loaded) w.problems.push_back(fmt::format("calibration {}: {}", run.calibration_id, loaded.error().message));
      else if (!*loaded) w.problems.push_back(fmt::format("calibration {}: not in the store", run.calibration_id));
      else cal = std::make_unique<core::CalibrationRecord>(core::as_when_used(std::move(**loaded)));
      it = cals.emplace(run.calibration_id, std::move(cal)).first;
    }
    if (!it->second) continue;
    const std::vector<core::Reading> readings = core::direct_readings(run);
    const std::vector<core::Reading> offset = core::offset_readings(run);
    const core::Judgement j = core::judge(window, *it->second, readings, {}, offset);
    const core::Judgement plain = core::judge(window, *it->second, readings, core::JudgeOptions{false}, offset);
    if (plain.verdict == core::Verdict::inconclusive) ++w.inconclusive_without_fit;
    ++w.judged;
    ++runs_per_cal[run.calibration_id];
    ++w.verdicts[core::to_string(j.verdict)];
    if (j.verdict == core::Verdict::aborted) w.problems.push_back(fmt::format("{}: re-judged aborted: {}", run.serial, j.reason));
    const core::Metrics& m = j.metrics;
    if (m.resonance_interval_kind == "shift-bound") {
      ++w.intervals_shift_bound;
      if (auto e = dip_error_radius(*it->second, j.points)) dip_radii.push_back(*e);
    }
    if (m.resonance_interval_kind == "rigorous") ++w.intervals_rigorous;
    if (m.resonance_interval_kind == "offset-pair") ++w.intervals_pair;
    if (m.resonance_low_hz && m.resonance_high_hz) half_widths.push_back((*m.resonance_high_hz - *m.resonance_low_hz) / 2);
    const bool rig_closed = m.rigorous_low_hz && m.rigorous_high_hz;
    if (rig_closed) rig_hw.push_back((*m.rigorous_high_hz - *m.rigorous_low_hz) / 2);
    if (m.resonance_interval_kind == "fit") {
      ++w.fit_used;
      if (m.resonance_low_hz && m.resonance_high_hz && rig_closed) {
        fit_hw.push_back((*m.resonance_high_hz - *m.resonance_low_hz) / 2);
        fit_rig_hw.push_back((*m.rigorous_high_hz - *m.rigorous_low_hz) / 2);
      }
    } else if (!m.fit_refused.empty()) {
      ++w.fit_refused[first_characters(m.fit_refused, 60)];
    }
    // The truth against the reported interval, for units with one resonance in the sweep (not
    // the open, shorted or intermittent feeds, whose "resonance" is no dip).
    const std::string& defect = u.truth.defect;
    const bool has_dip = defect != "open-feed" && defect != "shorted-feed" && defect != "intermittent";
    if (has_dip && m.resonance_hz && u.truth.f0_hz > 0 && !j.points.empty() &&
        u.truth.f0_hz >= j.points.front().frequency_hz && u.truth.f0_hz <= j.points.back().frequency_hz) {
      ++w.truth_checked;
      const double lo = m.resonance_low_hz.value_or(-1e300), hi = m.resonance_high_hz.value_or(1e300);
      if (u.truth.f0_hz < lo || u.truth.f0_hz > hi) {
        w.truth_outside.push_back(fmt::format("{}: true resonance {:.3f} MHz outside [{:.3f}, {:.3f}] MHz ({})", run.serial,
                                              u.truth.f0_hz / 1e6, lo / 1e6, hi / 1e6, m.resonance_interval_kind));
      }
    }
    if (j.verdict == core::Verdict::inconclusive) {
      ++w.inconclusive;
      if (j.reason.find("window") != std::string::npos) ++w.inconclusive_for_window;
      ++w.inconclusive_reasons[first_characters(j.reason, 60)];
    }
  }
  w.intervals_closed = static_cast<int>(half_widths.size());
  if (!half_widths.empty()) w.observed_half_width_median_hz = median(half_widths);
  if (!dip_radii.empty()) w.observed_error_radius_median = median(dip_radii);
  if (!fit_hw.empty()) {
    w.fit_half_width_median_hz = median(fit_hw);
    w.rigorous_half_width_median_hz = median(fit_rig_hw);
  }
  if (!rig_hw.empty()) w.rigorous_half_width_all_median_hz = median(rig_hw);
  if (w.reference.count == 0) {
    w.problems.push_back("no run passed: no reference units, so the window recipe's own nominal unit predicts");
  }
  w.calibrations_used = static_cast<int>(runs_per_cal.size());
  for (const auto& [id, n] : runs_per_cal) {
    if (w.calibration_id.empty() || n > runs_per_cal[w.calibration_id]) w.calibration_id = id;
  }
  if (w.calibration_id.empty()) {
    w.problems.push_back("no run could be re-judged: no prediction");
    return w;
  }
  const auto e = error_radius(*cals[w.calibration_id], window);
  if (!e) {
    w.problems.push_back(fmt::format("calibration {} has no budget point in the band", w.calibration_id));
    return w;
  }
  w.error_radius = *e;
  const auto p = core::predict_centring(window, capability, *e);
  if (!p) {
    w.problems.push_back("predict_centring gave no figure (no resonance window or no nominal unit)");
    return w;
  }
  w.predicted = true;
  w.predicted_fraction = p->inconclusive_fraction;
  w.half_width_hz = p->half_width_hz;
  w.basis = p->basis;
  return w;
}

}  // namespace echoline::score
