// The offset line as built (the switch's DUT-OFFSET arm): a short coax line with a little loss
// and a slightly mismatched connector at each end, and the reflection the test port sees of a
// unit behind it. Pure functions of frequency; no I/O.
#pragma once

#include "simulator/physics/bench.hpp"

namespace echoline::sim {

// The TRUE values of the line ("standards"/"offset_line" in the bench file). Near, never equal
// to, what a kit would state: a quarter wave at 915 MHz is 273.2 ps one way.
struct OffsetLineParams {
  double delay_ps = 274.0;               // one-way electrical delay, ps
  double loss_db = 0.08;                 // one-way insertion loss at 915 MHz, dB (grows as sqrt(f))
  double match_return_loss_db = 46;      // return loss of each end's connector discontinuity, dB
  double match_phase_deg = 40;           // phase of the input end's discontinuity reflection
  double far_match_phase_deg = -70;      // the far end's (not a config key: fixed)
};

// A two-port's scattering parameters at one frequency.
struct TwoPort {
  Complex s11, s12, s21, s22;
};

// A lossless reciprocal connector discontinuity with S11 = r, reference planes placed so that
// S21 = S12 = sqrt(1 - |r|^2) is real; unitarity then forces S22 = -conj(r). REQUIRES |r| < 1.
TwoPort connector_step(Complex r);

// A matched line: S11 = S22 = 0, S21 = S12 = 10^(-loss_db/20) * e^(-j w delay).
TwoPort matched_line(double frequency_hz, double delay_s, double loss_db);

// The reflection at port 1 of `s` with `load` at port 2:
// Gamma_in = S11 + S12 S21 Gamma_L / (1 - S22 Gamma_L).
Complex terminated(const TwoPort& s, Complex load);

// The line's one-way loss at f: loss_db * sqrt(f / 915 MHz) (skin effect).
double offset_line_loss_db(const OffsetLineParams& p, double frequency_hz);

// The reflection at the line's input with `gamma_unit` at its far end: input step, matched
// line, far-end step (the step's port 1 faces the test port at each end).
Complex offset_line_gamma(const OffsetLineParams& p, Complex gamma_unit, double frequency_hz);

// A DUT seen through the offset line. Holds a reference: `inner` must outlive the view.
class OffsetLineView final : public Dut {
 public:
  OffsetLineView(const Dut& inner, const OffsetLineParams& p) : inner_(inner), p_(p) {}
  Complex gamma(double frequency_hz) const override { return offset_line_gamma(p_, inner_.gamma(frequency_hz), frequency_hz); }
  std::string describe() const override { return inner_.describe() + " behind the offset line"; }

 private:
  const Dut& inner_;
  OffsetLineParams p_;
};

}  // namespace echoline::sim
