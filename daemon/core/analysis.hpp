// From raw DUT readings and a calibration to calibrated points and their figures: per-point
// return loss with worst/best bounds, resonance, depth, bandwidth and limit-line margins.
// Pure; thread-safe.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/dip_fit.hpp"
#include "daemon/core/pair_shift_bound.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// What the resonance-shift bound needs besides the points: the error radius in |Γ| the budget
// allows at each point, each reading's statistical σ (dB), the coverage factor, and how fast
// the error terms' phase can turn (the fixture's delay; daemon/core/MEASUREMENT.md).
struct ShiftContext {
  std::vector<double> gamma_error;   // per point, |Γ| units
  std::vector<double> sigma_db;      // per point, standard uncertainty of the RL reading
  double coverage_factor = 3;
  double error_delay_s = 5e-9;
  // For the dip fit (dip_fit.hpp): the reading noise alone (σ of one reading, dB), the error
  // vector's bound (directivity bound + k·connection, |Γ|) and the source-match bound.
  std::vector<double> reading_sigma_db;
  std::vector<double> error_vector;
  double source_match = 0;
  bool fit = true;                   // try the dip fit (false: the intervals of the points alone)
  // Fast capture: the whole trace may be shifted by up to this much in frequency (half a bin,
  // MEASUREMENT.md §11); the resonance interval is widened by it on each side. 0 for a step sweep.
  double frequency_offset_hz = 0;
};

// RL = reference − P_dut per point; bounds from the calibration's uncertainty budget
// (uncertainty.hpp). A reading above the reference (|Γ| > 1, noise) is clamped to RL = 0 dB
// and counted. REQUIRES: dut.size() == cal.reference_dbm.size() == cal.budget size (judge() checks).
// With `offset` (the same plan read through the kit's offset line; the budget must hold the
// line) each point's interval is also bounded by the offset pair (offset_pair_points.hpp) and
// the two intervals intersected; the return loss shown is then the pair's own estimate (no
// leakage cross term), inside the interval. A point whose two intervals do not overlap keeps
// the direct reading's alone and is counted: the line or the unit's connection is not what the
// kit states. The shift bound and the dip fit are derived for one reading through a smooth
// error vector (MEASUREMENT.md 6.2, 6.4), so they keep working on the direct reading's points
// (`direct`) and `shift`; the pair narrows the points, hence the rigorous interval.
struct CalibratedTrace {
  std::vector<PointResult> points;
  std::vector<PointResult> direct;      // with the offset pair: the direct reading's points; else empty
  ShiftContext shift;                   // of the direct reading
  std::size_t clamped_points = 0;
  std::size_t pair_disagreements = 0;   // points whose two intervals did not overlap
  PairSumTrace pair_sum;                // with the offset pair: its sum, for the resonance bound (§12.1)
};
// `leakage`: the budget the pair takes the leakage's bounds from (default the calibration's).
CalibratedTrace calibrate_points(const CalibrationRecord& cal, const std::vector<Reading>& dut,
                                 const std::vector<Reading>* offset = nullptr,
                                 const UncertaintyBudget* leakage = nullptr);

// A frequency interval around the resonance; an edge that reaches the end of the sweep without
// crossing its level is "open" (the true interval is at least that wide there).
struct Band {
  double low_hz = 0;
  double high_hz = 0;
  bool low_open = false;
  bool high_open = false;
  double width_hz() const { return high_hz - low_hz; }
};

// Return-loss maximum refined by the parabola through it and its two neighbours, and the
// interval where the TRUE maximum can lie given the points' [worst, best] bounds.
struct Resonance {
  double frequency_hz = 0;   // refined vertex (or the sample itself when not refined)
  double depth_db = 0;       // RL at frequency_hz (parabola value when refined)
  std::size_t index = 0;     // sample with the largest measured RL
  bool refined = false;
  bool at_edge = false;      // maximum on the first or last point: may lie outside the sweep
  // Bound interval of the true resonance (see resonance_interval in analysis.cpp):
  // low_hz <= frequency_hz <= high_hz. An open side reaches the sweep edge: the true maximum may
  // lie beyond it (low_hz / high_hz then hold the sweep edge frequency).
  double low_hz = 0;
  double high_hz = 0;
  bool low_open = false;
  bool high_open = false;
  bool shift_bound_used = false;   // the smooth-error bound tightened the rigorous interval
  bool fit_used = false;           // the dip fit's interval decided (analyze(); MEASUREMENT.md)
  bool pair_bound_used = false;    // the offset pair's sum bound tightened it (MEASUREMENT.md §12.1)
  // The rigorous interval alone (before the shift bound and the fit), for comparison.
  double rigorous_low_hz = 0, rigorous_high_hz = 0;
  bool rigorous_low_open = false, rigorous_high_open = false;
};
// Empty when there are no points. Without a context the error radius is read from the points'
// worst-case bounds and the error delay is 5 ns, with no statistical term.
// `shift_points`: the points the shift bound fits (the direct reading's, with the offset pair),
// at their own peak; default `points`.
// `pair_sum`: with the offset pair, its sum (MEASUREMENT.md §12.1) bounds the resonance too.
std::optional<Resonance> find_resonance(const std::vector<PointResult>& points, const ShiftContext* context = nullptr,
                                        const std::vector<PointResult>* shift_points = nullptr,
                                        const PairSumTrace* pair_sum = nullptr);

// From the first to the last sample where the best-case RL reaches the worst-case RL of sample
// `peak` (a second dip that qualifies is inside), outer edges linearly interpolated and widened
// by half the local point step, and reaching the sweep edge ("open") when a qualifying sample
// lies on it. Used by find_resonance.
// REQUIRES: peak < points.size().
Band resonance_interval(const std::vector<PointResult>& points, std::size_t peak);
// True when a sample apart from the peak's own region (a second dip) has a best case reaching
// the peak's worst case: the true maximum may lie there.
bool another_dip_qualifies(const std::vector<PointResult>& points, std::size_t peak);

// The interval the true resonance lies in when the error terms are smooth over the dip, as a
// coupler's and a cable's are (derivation in daemon/core/MEASUREMENT.md, "Where the resonance can
// be"): centre = vertex of the least-squares quadratic of |Γ_m|² over the points within 6 dB
// of the peak; half-width = E/s + (|Γ_min| + E)·2π·τ·E/s² + k·σ_vertex + gap + step/2, where
// E is the error radius, s = |dΓ_m/df| from the quadratic, τ the error delay and gap the
// distance between the quadratic's and a cubic fit's minimum. Empty when the assumptions fail:
// fewer than 2 points each side, the window touching the sweep edge, a peak under 12 dB
// (shallow or broad), a curvature that does not open upward, or a lopsided dip (gap larger
// than two steps and than E/s).
// REQUIRES: peak < points.size().
struct ShiftBound {
  double center_hz = 0;
  double half_width_hz = 0;
};
std::optional<ShiftBound> resonance_shift_bound(const std::vector<PointResult>& points, std::size_t peak,
                                                const ShiftContext& context);

// A context read from the points alone (tests, and data without a budget): the error radius
// from each point's worst-case bound, no statistical term, the given delay.
ShiftContext context_from_bounds(const std::vector<PointResult>& points, double error_delay_s = 5e-9);

// Vertex of the parabola through three points (x strictly increasing). Empty when the three
// points are collinear or the parabola opens upward (no maximum).
struct Vertex {
  double x = 0;
  double y = 0;
};
std::optional<Vertex> parabola_vertex(double x0, double y0, double x1, double y1, double x2, double y2);

// Which value of a point a computation uses.
enum class TraceValue { measured, worst, best };
double value_of(const PointResult& p, TraceValue which);

// Band around the resonance where RL >= threshold; open at a sweep end reached without crossing.
// Its edges: for the measured trace, linearly interpolated between the last point at or above and
// the first point below; for the bounds, only what the samples prove, since between two samples
// the true return loss is unknown: the worst case's band ends at its last sample at or above the
// threshold (a lower bound of the width), the best case's at its first sample below (an upper
// bound). Empty when the chosen trace is below the threshold at `center_index`.
std::optional<Band> find_band(const std::vector<PointResult>& points, std::size_t center_index,
                              double threshold_db, TraceValue which = TraceValue::measured);

// Linear interpolation of the frequency where the value crosses `level` between two points.
double crossing_hz(double f_a, double v_a, double f_b, double v_b, double level);

// Margins of one mask segment over the points inside it (inclusive ends): min over the points of
// value − limit, for measured, worst and best, and where each minimum is.
struct SegmentMargin {
  LimitSegment segment;
  std::size_t point_count = 0;
  double measured_db = 0, worst_db = 0, best_db = 0;   // +inf best margins are possible
  double measured_at_hz = 0, worst_at_hz = 0, best_at_hz = 0;
};
std::vector<SegmentMargin> mask_margins(const std::vector<PointResult>& points,
                                        const std::vector<LimitSegment>& mask);

// The whole analysis of one calibrated trace for a recipe.
struct Analysis {
  std::optional<Resonance> resonance;
  std::optional<Band> band;            // measured trace, at the recipe's bandwidth threshold
  std::optional<Band> band_worst;      // worst-case trace (for guarded bandwidth decisions)
  std::optional<Band> band_best;       // best-case trace
  std::vector<SegmentMargin> margins;  // one per mask segment, in recipe order
  double max_return_loss_db = 0;       // largest measured RL over the sweep
  std::size_t clamped_points = 0;
  int erratic_jumps = 0;               // neighbouring points more than kErraticJumpDb apart (decision.hpp)
  std::optional<DipFit> fit;           // the dip fit, tried when the context allows (used or refused)
};
Analysis analyze(const Recipe& recipe, const CalibratedTrace& trace);

}  // namespace echoline::core
