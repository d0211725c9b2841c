// Axes, ticks and path data for the inline SVG plots of the lot report.
#include "daemon/store/svg_plot.hpp"

#include <fmt/format.h>

#include <algorithm>
#include <cmath>

namespace echoline::store::detail {

std::string fixed(double v, int decimals) {
  if (std::abs(v) < 0.5 * std::pow(10.0, -decimals)) v = 0;  // no "-0.0"
  return fmt::format("{:.{}f}", v, decimals);
}

namespace {
double nice_step(double lo, double hi, int count) {
  const double raw = (hi - lo) / std::max(count, 1);
  if (!(raw > 0) || !std::isfinite(raw)) return 1;
  const double mag = std::pow(10.0, std::floor(std::log10(raw)));
  const double f = raw / mag;
  const double nice = f <= 1 ? 1 : f <= 2 ? 2 : f <= 5 ? 5 : 10;
  return nice * mag;
}
}  // namespace

std::vector<double> nice_ticks(double lo, double hi, int count) {
  std::vector<double> out;
  const double step = nice_step(lo, hi, count);
  for (double v = std::ceil(lo / step - 1e-9) * step; v <= hi + step * 1e-9 && out.size() < 200; v += step) {
    out.push_back(std::abs(v) < step * 1e-9 ? 0 : v);
  }
  return out;
}

void nice_range(double& lo, double& hi, int count) {
  if (!(hi > lo)) { hi = lo + 1; }
  const double step = nice_step(lo, hi, count);
  lo = std::floor(lo / step + 1e-9) * step;
  hi = std::ceil(hi / step - 1e-9) * step;
}

std::vector<double> count_ticks(double top, int count) {
  const double step = std::max(1.0, nice_step(0, std::max(top, 1.0), count));   // 1, 2, 5 x 10^n, n >= 0
  const double last = std::max(step, std::ceil(top / step - 1e-9) * step);
  std::vector<double> out;
  for (double v = 0; v <= last + 0.5 && out.size() < 200; v += step) out.push_back(v);
  return out;
}

std::string frame_svg(const Frame& f, const std::string& x_title, const std::string& y_title, double x_tick_scale,
                      int x_ticks, int y_ticks, bool y_counts) {
  std::string s;
  s += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" class=\"plotbg\"/>\n", f.left, f.top, f.width,
                   f.height);
  const double xstep = x_tick_scale;
  const auto xt = nice_ticks(f.x.lo / xstep, f.x.hi / xstep, x_ticks);
  const int xdec = xt.size() > 1 ? std::max(0, -static_cast<int>(std::floor(std::log10(xt[1] - xt[0]) + 1e-9))) : 0;
  for (double t : xt) {
    const double px = f.x(t * xstep);
    s += fmt::format("<line x1=\"{0:.1f}\" y1=\"{1}\" x2=\"{0:.1f}\" y2=\"{2}\" class=\"grid\"/>\n", px, f.top, f.top + f.height);
    s += fmt::format("<text x=\"{:.1f}\" y=\"{}\" class=\"tick\" text-anchor=\"middle\">{}</text>\n", px,
                     f.top + f.height + 15, fixed(t, xdec));
  }
  const double ylo = std::min(f.y.lo, f.y.hi), yhi = std::max(f.y.lo, f.y.hi);
  const auto yt = y_counts ? count_ticks(yhi, y_ticks) : nice_ticks(ylo, yhi, y_ticks);
  const int ydec = y_counts || yt.size() < 2 ? 0 : std::max(0, -static_cast<int>(std::floor(std::log10(yt[1] - yt[0]) + 1e-9)));
  for (double t : yt) {
    const double py = f.y(t);
    s += fmt::format("<line x1=\"{0}\" y1=\"{1:.1f}\" x2=\"{2}\" y2=\"{1:.1f}\" class=\"grid\"/>\n", f.left, py, f.left + f.width);
    s += fmt::format("<text x=\"{}\" y=\"{:.1f}\" class=\"tick\" text-anchor=\"end\">{}</text>\n", f.left - 6, py + 4,
                     fixed(t, ydec));
  }
  s += fmt::format("<rect x=\"{}\" y=\"{}\" width=\"{}\" height=\"{}\" class=\"frame\"/>\n", f.left, f.top, f.width, f.height);
  s += fmt::format("<text x=\"{:.1f}\" y=\"{}\" class=\"axis\" text-anchor=\"middle\">{}</text>\n", f.left + f.width / 2,
                   f.top + f.height + 34, x_title);
  const double yc = f.top + f.height / 2;
  s += fmt::format("<text x=\"{0}\" y=\"{1:.1f}\" class=\"axis\" text-anchor=\"middle\" transform=\"rotate(-90 {0} {1:.1f})\">{2}</text>\n",
                   f.left - 40, yc, y_title);
  return s;
}

std::string path_data(const Scale& x, const Scale& y, const std::vector<double>& xs, const std::vector<double>& ys,
                      double y_clamp_lo, double y_clamp_hi) {
  std::string d;
  bool pen = false;
  for (std::size_t i = 0; i < xs.size() && i < ys.size(); ++i) {
    double v = ys[i];
    if (std::isnan(v) || !std::isfinite(xs[i])) { pen = false; continue; }
    v = std::clamp(v, y_clamp_lo, y_clamp_hi);
    d += fmt::format("{}{:.1f},{:.1f}", pen ? " L" : (d.empty() ? "M" : " M"), x(xs[i]), y(v));
    pen = true;
  }
  return d;
}

}  // namespace echoline::store::detail
