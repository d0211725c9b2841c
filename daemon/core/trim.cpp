// Trim advice (trim.hpp): L_new = L·f_meas/f_target, MEASUREMENT.md §9 (common practice; assumes
// the end-effect factor K does not change with the small length change).
#include "daemon/core/trim.hpp"

#include <cmath>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"

namespace echoline::core {

double trimmed_length_mm(double length_mm, double measured_hz, double target_hz) {
  return length_mm * measured_hz / target_hz;
}

std::optional<TrimAdvice> trim_advice(const Trim& trim, double measured_hz, bool at_least) {
  if (!(trim.element_length_mm > 0) || !(trim.target_hz > 0) || !(measured_hz > 0) ||
      !std::isfinite(measured_hz)) {
    return std::nullopt;
  }
  TrimAdvice a;
  a.element_length_mm = trim.element_length_mm;
  a.measured_hz = measured_hz;
  a.target_hz = trim.target_hz;
  const double new_length = trimmed_length_mm(trim.element_length_mm, measured_hz, trim.target_hz);
  a.change_mm = new_length - trim.element_length_mm;
  const double amount = std::fabs(a.change_mm);
  const std::string lengths = fmt::format("({:.1f} \u2192 {:.1f} mm)", trim.element_length_mm, new_length);
  const std::string resonance = fmt::format("resonance {} vs target {}", format_mhz(measured_hz),
                                            format_frequency(trim.target_hz));
  if (amount < 0.05) {
    a.text = fmt::format("no trim needed: {}", resonance);
  } else if (a.change_mm < 0) {
    // Resonance below target: the element is too long; cutting raises the resonance.
    a.text = fmt::format("cut {}{:.1f} mm off the element {}; {}", at_least ? "at least " : "", amount,
                         lengths, resonance);
  } else {
    // Resonance above target: the element is too short; a wire cannot be lengthened in place.
    a.text = fmt::format("element is {}{:.1f} mm too short {}: replace it with a longer one; {}",
                         at_least ? "at least " : "", amount, lengths, resonance);
  }
  return a;
}

}  // namespace echoline::core
