// From raw DUT readings and a calibration to calibrated points and their figures: per-point
// return loss with worst/best bounds, resonance, depth, bandwidth and limit-line margins.
// Pure; thread-safe.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <vector>

#include "daemon/core/recipe.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::core {

// RL = reference − P_dut per point; bounds from the point's directivity and source_match_db.
// A reading above the reference (|Γ| > 1, noise) is clamped to RL = 0 dB and counted.
// REQUIRES: dut.size() == cal.reference_dbm.size() == cal.directivity_db.size() (judge() checks).
struct CalibratedTrace {
  std::vector<PointResult> points;
  std::size_t clamped_points = 0;
};
CalibratedTrace calibrate_points(const CalibrationRecord& cal, const std::vector<Reading>& dut,
                                 double source_match_db);

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
};
// Empty when there are no points.
std::optional<Resonance> find_resonance(const std::vector<PointResult>& points);

// Contiguous region around sample `peak` where the best-case RL reaches the worst-case RL of
// the peak sample, edges linearly interpolated and widened by half the local point step, and
// reaching the sweep edge ("open") when the region does. Used by find_resonance.
// REQUIRES: peak < points.size().
Band resonance_interval(const std::vector<PointResult>& points, std::size_t peak);

// Half-width of the interval the true resonance can lie in when the error terms (directivity
// leakage, source match) are smooth over the dip, as a coupler's and a cable's are: a complex
// error e of magnitude <= eps added to the DUT's reflection moves the |Γ| minimum by at most
// eps/|dΓ/df| to first order. |dΓ/df| is the square root of the curvature of |Γ_m|² near the
// peak (least-squares quadratic over the points within 6 dB of it); eps is read from the
// peak's worst-case bound. Includes a 1.25 safety factor (error rotation, trajectory curvature,
// noise) and half the local point step. Empty when the dip is too shallow or too sparse to fit.
// REQUIRES: peak < points.size().
std::optional<double> resonance_shift_bound_hz(const std::vector<PointResult>& points, std::size_t peak);

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

// Band around the resonance where RL >= threshold, each edge linearly interpolated between the
// last point at or above and the first point below; open at a sweep end reached without crossing.
// Empty when the chosen trace is below the threshold at `center_index`.
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
};
Analysis analyze(const Recipe& recipe, const CalibratedTrace& trace);

}  // namespace echoline::core
