// The offset pair applied to a run: per plan point, the |Γ| interval from the direct and the
// offset reading and the calibration's budget (its reference, directivity, noise, source match
// and the kit's offset line). Pure; thread-safe. Derivation: MEASUREMENT.md §12.
#pragma once

#include <vector>

#include "daemon/core/budget_types.hpp"
#include "daemon/core/offset_pair.hpp"
#include "daemon/core/pair_shift_bound.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// REQUIRES: b.offset_line set; direct, offset and reference_dbm the budget's size, in plan
// order. A point whose readings are not finite, or where the line is too far from half a turn,
// has usable = false.
// `leakage`: the budget the leakage's bounds come from (default `b`); the judge's noise-free
// variant of a budget keeps the real one's, as it keeps its directivity bound.
std::vector<OffsetPairInterval> offset_pair_intervals(const UncertaintyBudget& b, const std::vector<double>& reference_dbm,
                                                      const std::vector<Reading>& direct,
                                                      const std::vector<Reading>& offset,
                                                      const UncertaintyBudget* leakage = nullptr);

// The pair's sum per plan point for the resonance bound (pair_shift_bound.hpp): y, its noise,
// the leakage, LOAD residual and turn error per point, and the bench's figures. gamma_high and
// return_loss_db are left for the caller (they come from the intersected points).
// REQUIRES: as offset_pair_intervals; `pair` its result.
PairSumTrace offset_pair_sum(const UncertaintyBudget& b, const std::vector<double>& reference_dbm,
                             const std::vector<Reading>& direct, const std::vector<Reading>& offset,
                             const std::vector<OffsetPairInterval>& pair, const UncertaintyBudget* leakage = nullptr);

}  // namespace echoline::core
