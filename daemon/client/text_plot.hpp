// A small character plot of return loss against frequency with the limit line, for the operator
// console: x in MHz, y in dB (higher = better match, so a resonance is a peak). Pure; thread-safe.
#pragma once

#include <string>
#include <vector>

namespace echoline::client {

struct PlotPoint {
  double frequency_hz = 0;
  double return_loss_db = 0;   // NaN points are skipped
};

struct PlotLimit {
  double start_hz = 0;
  double stop_hz = 0;
  double min_return_loss_db = 0;
};

struct PlotSize {
  int width = 60;    // plot area columns
  int height = 12;   // plot area rows
};

// Lines of text: a title, `height` rows each with a y label and '|', the x axis with MHz labels,
// and a legend. Marks: '*' a point meeting its limit (or outside every limit), 'x' a point below
// the limit over its segment, '-' the limit line. Empty input gives one line saying so.
std::string return_loss_plot(const std::vector<PlotPoint>& points, const std::vector<PlotLimit>& limits,
                             PlotSize size = {});

}  // namespace echoline::client
