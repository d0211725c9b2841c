// Plan expansion and names for recipe values (recipe.hpp).
#include "daemon/core/recipe.hpp"

#include <cmath>

namespace echoline::core {

std::vector<double> plan_frequencies(const Recipe& recipe) {
  std::vector<double> out;
  for (const Segment& s : recipe.segments) {
    if (s.points <= 0) continue;
    for (int i = 0; i < s.points; ++i) {
      double f = s.points == 1 ? s.start_hz
                               : s.start_hz + (s.stop_hz - s.start_hz) * i / (s.points - 1);
      // Segments that share an end point measure it once.
      if (!out.empty() && std::fabs(out.back() - f) < 1e-3) continue;
      out.push_back(f);
    }
  }
  return out;
}

const char* to_string(DecisionRule rule) { return rule == DecisionRule::simple ? "simple" : "guarded"; }

}  // namespace echoline::core
