// Progress of a sweep on the console: drawn in place on a terminal ('\r', no newline until the
// end), or as a few plain lines on a pipe (first point, each quarter, last point; no control codes).
// ProgressDisplay writes to one ostream; one user thread at a time.
#pragma once

#include <ostream>
#include <string>

namespace echoline::client {

// "[##########..........]  17/201" with `width` cells in the bar. Pure.
std::string progress_bar(int point, int of, int width = 30);

class ProgressDisplay {
 public:
  // `label` is shown before the bar, e.g. "measuring WH915A-0001" or "measuring OPEN".
  ProgressDisplay(std::ostream& out, bool in_place, std::string label);
  void update(int point, int of);
  // Ends the in-place line (newline) if one is open. Idempotent.
  void finish();

 private:
  std::ostream& out_;
  bool in_place_;
  std::string label_;
  bool line_open_ = false;
  int last_quarter_ = -1;
};

}  // namespace echoline::client
