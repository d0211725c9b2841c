// The sine and cosine integrals Si, Ci and Cin that the wire-antenna formulas need.
// Power series for small arguments, the continued fraction of E1(ix) above; pure functions,
// callable from any thread.
#pragma once

namespace echoline::sim {

// Euler's constant (A&S 6.1.3).
inline constexpr double kEulerGamma = 0.57721566490153286061;

// Si(x) = integral from 0 to x of sin(t)/t dt (A&S 5.2.1). Any x (odd function).
double sine_integral(double x);

// Ci(x) = gamma + ln x + integral from 0 to x of (cos t - 1)/t dt (A&S 5.2.2). REQUIRES: x > 0
// (std::domain_error otherwise).
double cosine_integral(double x);

// Cin(x) = integral from 0 to x of (1 - cos t)/t dt = gamma + ln x - Ci(x) (A&S 5.2.2).
// Any x (even function); no cancellation for small x.
double cin_integral(double x);

}  // namespace echoline::sim
