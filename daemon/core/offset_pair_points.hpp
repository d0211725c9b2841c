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

// Whether the reading through the offset line is the direct reading again: the line not in
// place (an operator who answered the prompt without fitting it, or left it on from the last
// unit; a switch arm that does not reach the line). Through the line the two readings differ by
// the line's round-trip loss where the unit reflects more than the coupler leaks, and by twice
// the leakage cross term, whose phase turns over the sweep; the same reading twice differs by
// its noise alone. Same when the mean over the finite points of ((P_B − P_A)/σ)², σ the two
// readings' noise combined (3.4), is at most kSameReadingMeanSquare: an RMS difference of at
// most twice the noise. `rms_db` and `noise_db` (optional) get the RMS difference and the RMS σ.
inline constexpr double kSameReadingMeanSquare = 4.0;
bool offset_reading_is_direct(const UncertaintyBudget& b, const std::vector<Reading>& direct,
                              const std::vector<Reading>& offset, double* rms_db = nullptr, double* noise_db = nullptr);

}  // namespace echoline::core
