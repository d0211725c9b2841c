// Mask prediction against the lot (mask_score.hpp).
#include "tests/score/mask_score.hpp"

#include <algorithm>

#include <fmt/format.h>

#include "daemon/core/calibration.hpp"
#include "daemon/core/uncertainty.hpp"
#include "tests/score/window_score.hpp"

namespace echoline::score {

MaskFigures score_mask(store::RunStore& store_copy, const std::vector<UnitRecord>& units, core::Recipe recipe,
                       const core::StationCapability& capability, const std::string& calibration_id,
                       const VerdictFigures& verdicts) {
  MaskFigures m;
  if (verdicts.units > 0) m.observed_fraction = static_cast<double>(verdicts.inconclusive) / verdicts.units;
  // The nominal unit from every run the station did not fail: a mask the bench cannot decide
  // passes few units, so the passing runs alone would describe only the best-centred ones.
  std::vector<UnitRecord> reference;
  for (const UnitRecord& u : units) {
    if (u.run.verdict != core::Verdict::pass && u.run.verdict != core::Verdict::inconclusive) continue;
    reference.push_back(u);
    reference.back().run.verdict = core::Verdict::pass;
  }
  const ReferenceUnits ref = reference_units(reference);
  m.reference_count = ref.count;
  // Bandwidth, depth and spread from the reference; the centre stays the recipe's (its trim
  // target): the measured resonances carry this bench's own leakage tilt, which the prediction
  // models itself.
  const std::optional<double> center = recipe.nominal.center_hz;
  apply_reference(recipe, ref);
  recipe.nominal.center_hz = center;
  if (calibration_id.empty()) {
    m.problems.push_back("no calibration judged a run: no prediction");
    return m;
  }
  auto loaded = store_copy.load_calibration(calibration_id);
  if (!loaded || !*loaded) {
    m.problems.push_back(fmt::format("calibration {}: not readable", calibration_id));
    return m;
  }
  const core::CalibrationRecord cal = core::as_when_used(std::move(**loaded));
  const auto e = error_radius(cal, recipe);
  if (!e) {
    m.problems.push_back(fmt::format("calibration {} has no budget point in the mask", calibration_id));
    return m;
  }
  m.error_radius = *e;
  // The leakage: what the LOAD alone reads (|d + Γ_LOAD|), median over the mask's span.
  std::vector<double> leak;
  const core::UncertaintyBudget& b = cal.budget;
  for (std::size_t i = 0; i < b.frequency_hz.size() && i < b.directivity_measured.size(); ++i) {
    for (const core::LimitSegment& s : recipe.limits.mask) {
      if (b.frequency_hz[i] >= s.start_hz - 1e-3 && b.frequency_hz[i] <= s.stop_hz + 1e-3) {
        leak.push_back(b.directivity_measured[i]);
        break;
      }
    }
  }
  if (leak.empty()) {
    m.problems.push_back(fmt::format("calibration {} has no LOAD reading in the mask", calibration_id));
    return m;
  }
  std::nth_element(leak.begin(), leak.begin() + leak.size() / 2, leak.end());
  m.leakage = leak[leak.size() / 2];
  const auto p = core::predict_mask(recipe, capability, *e, m.leakage);
  if (!p || !p->have_unit) {
    m.problems.push_back("predict_mask gave no share (no mask or no nominal unit)");
    return m;
  }
  m.predicted = true;
  m.predicted_fraction = p->inconclusive_fraction;
  m.predicted_low = p->inconclusive_low;
  m.predicted_high = p->inconclusive_high;
  m.guards = p->guards;
  m.basis = p->basis;
  return m;
}

}  // namespace echoline::score
