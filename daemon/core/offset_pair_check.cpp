// Recipe check of the offset pair (offset_pair_check.hpp).
#include "daemon/core/offset_pair_check.hpp"

#include <algorithm>
#include <cmath>
#include <numbers>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"
#include "daemon/core/offset_pair.hpp"

namespace echoline::core {

void check_offset_pair(const Recipe& r, const StationCapability& st, std::vector<CheckFinding>& out) {
  if (!r.offset_pair) return;
  const auto add = [&](const char* severity, std::string message) {
    out.push_back(CheckFinding{severity, "/offset_pair", std::move(message)});
  };
  const std::string kit = st.kit.source.empty() ? st.kit.identity : st.kit.source;
  if (r.mode != SweepMode::step) {
    add("error", "the offset pair needs a step sweep: both readings of a point must be at the same frequency, and a "
                 "fast capture's frequency offset differs from one capture to the next; set \"mode\": \"step\"");
  }
  if (st.has_switch && st.switch_positions.count(kOffsetArm) == 0) {
    add("warning", fmt::format("the switch (profile {}) has no {} position: the operator will be asked to fit the kit's "
                               "offset line between the DUT socket and each unit for its second reading; to read both "
                               "without handling, add the position to the profile's switch.positions, wired to the "
                               "unit's socket through the line",
                               st.switch_profile, kOffsetArm));
  }
  if (st.offset_line_by_hand && st.kit.offset_line) {
    const double k_conn = st.kit.offset_line->match - st.kit_line_match;
    add("warning", fmt::format("the offset line is fitted by hand for each unit: each unit is connected twice, the "
                               "station prompts for the second connection, and the line's own connection is made anew "
                               "each time, so its repeatability (k·u_conn = {:.4f}) joins the kit's line match: "
                               "{:.1f} dB becomes {:.1f} dB in every bound the pair gives",
                               k_conn, -20 * std::log10(st.kit_line_match), -20 * std::log10(st.kit.offset_line->match)));
  }
  if (!st.kit.offset_line) {
    add("error", fmt::format("kit {} defines no \"offset_line\"; add the line's delay, loss and match to the kit file "
                             "(config/README.md, calibration kits) or set offset_pair to false",
                             kit));
    return;
  }
  // Where the line is more than a quarter turn from half a turn the pair is not used: those
  // points are bounded by the direct reading alone.
  const std::vector<double> plan = plan_frequencies(r);
  std::size_t unusable = 0;
  double first = 0, worst_turn = 0;
  for (double f : plan) {
    const double turn = offset_turn_error(f, *st.kit.offset_line);
    if (turn > std::numbers::pi / 2) {
      if (unusable++ == 0) first = f;
    } else {
      worst_turn = std::max(worst_turn, turn);
    }
  }
  if (unusable > 0) {
    add("warning", fmt::format("the offset line ({:.1f} ps) is more than a quarter turn from half a turn at {} of {} "
                               "points (from {}): those points are bounded by the direct reading alone; a line of "
                               "{:.1f} ps is a half turn at the plan's centre",
                               st.kit.offset_line->delay_s * 1e12, unusable, plan.size(), format_mhz(first),
                               plan.empty() ? 0.0 : 1e12 / (4 * (plan.front() + plan.back()) / 2)));
  }
  if (unusable < plan.size() && worst_turn > std::numbers::pi / 6) {
    add("warning", fmt::format("the offset line turns up to {:.0f}° away from half a turn over the plan: the pair "
                               "cancels less of the leakage there (MEASUREMENT.md §12, term R1); narrow the plan "
                               "around the line's quarter-wave frequency, or use a line with a tighter delay tolerance",
                               worst_turn * 180 / std::numbers::pi));
  }
}

}  // namespace echoline::core
