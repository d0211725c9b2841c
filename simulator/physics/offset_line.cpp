// The offset line's cascade (offset_line.hpp): two lossless connector steps around a matched,
// lossy, delaying line, each stage closed on the one behind it with the terminated-two-port formula.
#include "simulator/physics/offset_line.hpp"

#include <cmath>
#include <numbers>

namespace echoline::sim {
namespace {

constexpr double kReferenceHz = 915e6;   // the frequency loss_db is given at
constexpr double kDegree = std::numbers::pi / 180.0;

}  // namespace

TwoPort connector_step(Complex r) {
  const double t = std::sqrt(1.0 - std::norm(r));
  return TwoPort{r, t, t, -std::conj(r)};
}

TwoPort matched_line(double frequency_hz, double delay_s, double loss_db) {
  const Complex s21 = std::polar(std::pow(10.0, -loss_db / 20.0), -2.0 * std::numbers::pi * frequency_hz * delay_s);
  return TwoPort{0.0, s21, s21, 0.0};
}

Complex terminated(const TwoPort& s, Complex load) { return s.s11 + s.s12 * s.s21 * load / (1.0 - s.s22 * load); }

double offset_line_loss_db(const OffsetLineParams& p, double frequency_hz) {
  return p.loss_db * std::sqrt(frequency_hz / kReferenceHz);
}

Complex offset_line_gamma(const OffsetLineParams& p, Complex gamma_unit, double frequency_hz) {
  const double rho = std::pow(10.0, -p.match_return_loss_db / 20.0);
  const TwoPort input = connector_step(std::polar(rho, p.match_phase_deg * kDegree));
  const TwoPort far = connector_step(std::polar(rho, p.far_match_phase_deg * kDegree));
  const TwoPort line = matched_line(frequency_hz, p.delay_ps * 1e-12, offset_line_loss_db(p, frequency_hz));
  return terminated(input, terminated(line, terminated(far, gamma_unit)));
}

}  // namespace echoline::sim
