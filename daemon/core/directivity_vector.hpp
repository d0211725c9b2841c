// The directivity vector d = e00/e01 at one frequency from two readings of known-mismatch
// standards (|Γ| about 0.1, about a quarter wave apart): the intersection of two circles
// |d + Γ_A| = r_A, |d + Γ_B| = r_B, the mirror solution rejected by the LOAD's |d| and the
// OPEN/SHORT projection, with a rigorous bound of |d − d̂| from everything the readings and the
// kit leave open. Derivation: daemon/core/MEASUREMENT.md, "The directivity vector". Pure.
#pragma once

#include <complex>
#include <string>
#include <vector>

#include "daemon/core/budget_types.hpp"
#include "daemon/core/cal_kit.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// One known-mismatch reading at one frequency.
struct MismatchReading {
  std::complex<double> gamma;   // the kit model's reflection at this frequency
  double gamma_tolerance = 0;   // bound of |Γ_true − Γ_model| (magnitude and phase tolerance, connection)
  double level_db = 0;          // P_x − R: the reading relative to the calibration's reference, dB
  double sigma_db = 0;          // standard uncertainty of level_db from reading noise (reading and reference)
};

struct DirectivityInputs {
  MismatchReading a, b;
  double reference_error_low_db = 0;   // R − T ∈ [low, high] (MEASUREMENT.md §3.2), bounded
  double reference_error_high_db = 0;
  double coverage_factor = 3;          // k for the reading noise (JCGM 100 §6.2)
  double source_match = 0;             // |E_S| bound, linear
  double magnitude_low = 0;            // |d| ∈ [low, high] from the LOAD (0 and 1: nothing known)
  double magnitude_high = 1;
  // Re(d·projection) ∈ [low, high] from the OPEN−SHORT difference; ignored when not have_projection.
  bool have_projection = false;
  std::complex<double> projection{1, 0};
  double projection_low = 0, projection_high = 0;
};

struct DirectivityEstimate {
  bool solved = false;          // false: the readings admit no d (problem says why)
  std::string problem;
  std::complex<double> d;       // the estimate d̂
  double bound = 0;             // |d − d̂| ≤ bound: bounded terms plus noise at the coverage factor
  double bound_systematic = 0;  // the same with the noise left out (bounded terms alone)
  double sigma = 0;             // standard uncertainty of d̂ from the reading noise (first order)
  bool ambiguous = false;       // the mirror solution could not be rejected: the bound covers both
};

DirectivityEstimate solve_directivity(const DirectivityInputs& in);

// The two mismatch standards as the kit models them at each plan point, and the bound of how far
// each true standard may be from its model (magnitude and phase tolerance, connection at k·u).
struct MismatchModels {
  std::vector<std::complex<double>> gamma_a, gamma_b;
  double tolerance_a = 0, tolerance_b = 0;
};

// How far a true mismatch standard may lie from its model: Γ = (ρ + ε)·e^(j(θ + η)) with
// |ε| <= δρ and |η| <= δθ gives |Γ − Γ_model|² = ε² + 2ρ(ρ + ε)(1 − cos η) <= δρ² + (ρ + δρ)²·δθ²;
// a reconnection adds up to `connection` more (k·u_conn).
double mismatch_tolerance(double magnitude, double magnitude_tolerance, double phase_tolerance_rad, double connection);

// Solves d at every plan point of a calibration whose budget is built (uncertainty.hpp) and
// stores d̂, its bound, its bounded part and its noise in the budget (directivity_re, ...). The
// LOAD's |d| and the OPEN/SHORT projection (directivity_phase.hpp) reject the mirror solution.
// A point that cannot be solved gets bound 1 and a warning. REQUIRES: traces of the plan's size.
void add_directivity_vector(UncertaintyBudget& budget, const CalibrationRecord& cal, const CalKit& kit,
                            const std::vector<Reading>& mismatch_a, const std::vector<Reading>& mismatch_b,
                            const MismatchModels& models, std::vector<std::string>& warnings);

}  // namespace echoline::core
