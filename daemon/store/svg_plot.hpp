// Small SVG building blocks for the reports: linear axes with round ticks, frames with labelled
// axes, path data from points. Pure string building, no I/O; thread-safe.
#pragma once

#include <string>
#include <vector>

namespace echoline::store::detail {

// Maps [lo, hi] onto pixels [p0, p1] (p1 < p0 allowed, for y axes).
struct Scale {
  double lo = 0, hi = 1, p0 = 0, p1 = 1;
  double operator()(double v) const { return p0 + (v - lo) / (hi - lo) * (p1 - p0); }
};

// Round tick values ("1, 2, 5 × 10^n" steps) covering [lo, hi], about `count` of them.
std::vector<double> nice_ticks(double lo, double hi, int count);
// Widens [lo, hi] outwards to round tick values.
void nice_range(double& lo, double& hi, int count);
// A count axis (units, runs) from 0: whole-number ticks only (step 1, 2, 5, 10, 20, ...), about
// `count` of them, the last at or above `top` (at least 1).
std::vector<double> count_ticks(double top, int count);

struct Frame {
  double left, top, width, height;   // plot area inside the SVG, pixels
  Scale x, y;
};

// Grid, ticks and axis titles for a frame (x title below, y title rotated at the left).
// tick_scale divides tick values for display (1e6 shows Hz ticks as MHz). `y_counts`: the y
// axis counts things (count_ticks), so its ticks are whole numbers.
std::string frame_svg(const Frame& f, const std::string& x_title, const std::string& y_title, double x_tick_scale,
                      int x_ticks = 10, int y_ticks = 8, bool y_counts = false);

// "M x,y L x,y ..." with one decimal; points whose value is not finite break the path (new M).
std::string path_data(const Scale& x, const Scale& y, const std::vector<double>& xs, const std::vector<double>& ys,
                      double y_clamp_lo, double y_clamp_hi);

// Number with `decimals` decimals, locale-independent.
std::string fixed(double v, int decimals);

}  // namespace echoline::store::detail
