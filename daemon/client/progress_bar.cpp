#include "daemon/client/progress_bar.hpp"

#include <algorithm>

#include <fmt/format.h>

namespace echoline::client {

std::string progress_bar(int point, int of, int width) {
  const int total = std::max(of, 1);
  const int done = std::clamp(point, 0, total);
  const int cells = static_cast<int>(static_cast<long long>(done) * width / total);
  return fmt::format("[{}{}] {:>4}/{}", std::string(static_cast<std::size_t>(cells), '#'),
                     std::string(static_cast<std::size_t>(width - cells), '.'), done, total);
}

ProgressDisplay::ProgressDisplay(std::ostream& out, bool in_place, std::string label)
    : out_(out), in_place_(in_place), label_(std::move(label)) {}

void ProgressDisplay::update(int point, int of) {
  if (in_place_) {
    out_ << "\r  " << label_ << " " << progress_bar(point, of) << std::flush;
    line_open_ = true;
    return;
  }
  // Plain lines: the first point, every quarter, the last point.
  const int quarter = of > 0 ? (point * 4) / of : 0;
  if (point == 1 || point == of || quarter > last_quarter_) {
    if (quarter > last_quarter_) last_quarter_ = quarter;
    out_ << "  " << label_ << ": point " << point << " of " << of << "\n" << std::flush;
  }
}

void ProgressDisplay::finish() {
  if (line_open_) {
    out_ << "\n" << std::flush;
    line_open_ = false;
  }
}

}  // namespace echoline::client
