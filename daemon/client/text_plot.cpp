#include "daemon/client/text_plot.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

namespace echoline::client {
namespace {

// The limit over frequency f, or NaN when no segment covers it (the strictest segment wins).
double limit_at(const std::vector<PlotLimit>& limits, double f) {
  double best = std::numeric_limits<double>::quiet_NaN();
  for (const auto& l : limits) {
    if (f >= l.start_hz && f <= l.stop_hz && !(l.min_return_loss_db <= best)) best = l.min_return_loss_db;
  }
  return best;
}

}  // namespace

std::string return_loss_plot(const std::vector<PlotPoint>& points, const std::vector<PlotLimit>& limits, PlotSize size) {
  const int w = std::max(size.width, 10);
  const int h = std::max(size.height, 4);
  std::vector<PlotPoint> pts;
  for (const auto& p : points) {
    if (std::isfinite(p.frequency_hz) && std::isfinite(p.return_loss_db)) pts.push_back(p);
  }
  if (pts.empty()) return "(no return-loss points to plot)\n";
  double f_lo = pts.front().frequency_hz, f_hi = f_lo, rl_max = 0;
  for (const auto& p : pts) {
    f_lo = std::min(f_lo, p.frequency_hz);
    f_hi = std::max(f_hi, p.frequency_hz);
    rl_max = std::max(rl_max, p.return_loss_db);
  }
  for (const auto& l : limits) rl_max = std::max(rl_max, l.min_return_loss_db + 5);
  // y from 0 dB (bottom) to a multiple of 5 dB (top), 10..60 dB.
  const double y_top = std::clamp(std::ceil(rl_max / 5.0) * 5.0, 10.0, 60.0);
  if (f_hi <= f_lo) f_hi = f_lo + 1;
  auto col_of = [&](double f) {
    return std::clamp(static_cast<int>(std::lround((f - f_lo) / (f_hi - f_lo) * (w - 1))), 0, w - 1);
  };
  auto row_of = [&](double db) {  // row 0 at the top
    const double v = std::clamp(db, 0.0, y_top);
    return std::clamp(static_cast<int>(std::lround((y_top - v) / y_top * (h - 1))), 0, h - 1);
  };
  auto freq_of = [&](int col) { return f_lo + (f_hi - f_lo) * col / (w - 1); };

  std::vector<std::string> grid(static_cast<std::size_t>(h), std::string(static_cast<std::size_t>(w), ' '));
  for (int c = 0; c < w; ++c) {
    const double lim = limit_at(limits, freq_of(c));
    if (std::isfinite(lim)) grid[static_cast<std::size_t>(row_of(lim))][static_cast<std::size_t>(c)] = '-';
  }
  // One mark per column: the point with the highest RL that falls in it; 'x' when any point of
  // the column misses its limit.
  std::vector<double> col_best(static_cast<std::size_t>(w), std::numeric_limits<double>::quiet_NaN());
  std::vector<bool> col_bad(static_cast<std::size_t>(w), false);
  for (const auto& p : pts) {
    const auto c = static_cast<std::size_t>(col_of(p.frequency_hz));
    if (!(p.return_loss_db <= col_best[c])) col_best[c] = p.return_loss_db;
    const double lim = limit_at(limits, p.frequency_hz);
    if (std::isfinite(lim) && p.return_loss_db < lim) col_bad[c] = true;
  }
  for (std::size_t c = 0; c < col_best.size(); ++c) {
    if (std::isfinite(col_best[c])) grid[static_cast<std::size_t>(row_of(col_best[c]))][c] = col_bad[c] ? 'x' : '*';
  }

  std::string out = "  return loss, dB\n";
  for (int r = 0; r < h; ++r) {
    const double v = y_top - y_top * r / (h - 1);
    const bool label = r == 0 || r == h - 1 || r == (h - 1) / 2;
    out += label ? fmt::format("{:>6.1f} |", v) : std::string("       |");
    std::string row = grid[static_cast<std::size_t>(r)];
    while (!row.empty() && row.back() == ' ') row.pop_back();
    out += row + "\n";
  }
  out += "       +" + std::string(static_cast<std::size_t>(w), '-') + "\n";
  const std::string left = fmt::format("{:.1f}", f_lo / 1e6);
  const std::string mid = fmt::format("{:.1f}", (f_lo + f_hi) / 2 / 1e6);
  const std::string right = fmt::format("{:.1f}", f_hi / 1e6);
  std::string axis(static_cast<std::size_t>(w + 8), ' ');
  axis.replace(8, left.size(), left);
  const std::size_t mid_at = 8 + static_cast<std::size_t>(w / 2) - mid.size() / 2;
  axis.replace(mid_at, mid.size(), mid);
  axis.replace(axis.size() - right.size(), right.size(), right);
  out += axis + "  MHz\n";
  out += "        * return loss   x below the limit   - limit line (minimum return loss)\n";
  return out;
}

}  // namespace echoline::client
