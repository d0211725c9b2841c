// The stored form of a calibration's uncertainty budget (see uncertainty.hpp for how it is
// built and used): reading noise per segment and the per-point bounded terms. Data only.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/cal_kit.hpp"

namespace echoline::core {

// Reading noise of one recipe segment, from two back-to-back sweeps of the OPEN (full-reflection
// level) and of the LOAD (the lowest level the calibration sees). Standard deviations of ONE
// reading in dB, at the upper 95 % confidence limit of the estimate.
struct SegmentNoise {
  double start_hz = 0, stop_hz = 0;
  std::size_t pairs = 0;          // points compared (0: not measured, assumed values below)
  double high_level_db = 0;       // σ at the OPEN level
  double load_level_db = 0;       // σ at the LOAD level
  double load_level_dbm = 0;      // mean LOAD reading over the segment
  bool measured = false;
};

struct UncertaintyBudget {
  double coverage_factor = 3;     // k for the statistical terms (JCGM 100 §6.2)
  double source_match = 0;        // |E_S| bound, linear
  double connection = 0;          // standard uncertainty of one connection, linear |Γ|
  double noise_floor_dbm = -200;  // receiver noise floor at the recipe's RBW (additive noise)
  double error_delay_s = 5e-9;    // how fast the error terms' phase may turn against the DUT's
  // Fast capture: each reading may be the unit's reflection up to this far from its plan
  // frequency (half a receiver bin; the same offset for every point of one capture). 0 for a
  // step sweep. The bounded term it gives depends on the trace's slope (MEASUREMENT.md §11).
  double frequency_offset_hz = 0;
  std::string kit_identity;
  std::string kit_serial;
  std::vector<SegmentNoise> noise;
  // The kit's definitions of the mismatch standards this calibration measured (their traces are
  // under the same names), so a stored calibration can be worked again offline. Empty: none.
  std::vector<MismatchStandard> mismatch;
  // The kit's offset line when the recipe reads each unit a second time through it (the offset
  // pair, MEASUREMENT.md §12), so a stored run can be judged again offline. Empty: one reading.
  std::optional<OffsetLine> offset_line;
  // Per plan point:
  std::vector<double> frequency_hz;
  std::vector<double> reference_error_low_db;   // bounded: R − T ∈ [low, high] (R: reference, T: true |Γ|=1 level)
  std::vector<double> reference_error_high_db;
  std::vector<double> reference_noise_db;       // standard uncertainty of R from reading noise
  std::vector<double> directivity_bound;        // |E_D| bound relative to T, linear, LOAD residual included
  // With the directivity vector (below) |E_D| ≤ |d̂| + bound as well; directivity_bound is then the
  // smaller of the two and this keeps what the LOAD alone gave (MEASUREMENT.md §3.1, 6.5). Empty
  // without mismatch standards, and in calibrations stored before this existed: directivity_bound
  // is then the LOAD's.
  std::vector<double> directivity_bound_from_load;
  std::vector<double> directivity_measured;     // 10^((P_load − R)/20): what the LOAD alone says
  std::vector<double> load_residual;            // the kit's |Γ_load| bound at the point
  // The directivity vector d = e00/e01 from two known-mismatch standards (directivity_vector.hpp),
  // per point; empty when the calibration measured none. |d − d̂| <= directivity_vector_bound
  // (bounded terms plus the noise at the coverage factor); of that, the bounded terms alone and
  // the noise's standard uncertainty. A point whose d could not be solved has bound 1
  // (|Γ| units: nothing known).
  std::vector<double> directivity_re, directivity_im;
  std::vector<double> directivity_vector_bound;
  std::vector<double> directivity_vector_systematic;
  std::vector<double> directivity_vector_sigma;
  bool has_directivity_vector() const { return !directivity_re.empty() && directivity_re.size() == frequency_hz.size(); }
  bool empty() const { return frequency_hz.empty(); }
};

}  // namespace echoline::core
