// Si, Ci and Cin. For |x| <= 4 the power series A&S 5.2.14 (Si) and 5.2.16 (Ci, written for
// Cin) converge fast with little cancellation (largest term below e^4 / 4). Above, both come
// from the exponential integral of an imaginary argument, E1(ix) = -Ci(x) + i (Si(x) - pi/2)
// (A&S 5.2.23), evaluated by the even form of the continued fraction A&S 5.1.22,
//   E1(z) = exp(-z) / (z + 1 - 1^2 / (z + 3 - 2^2 / (z + 5 - ...))),
// with the modified Lentz method (W. J. Lentz, Applied Optics 15 (1976) 668; Thompson & Barnett,
// J. Comput. Phys. 64 (1986) 490), stopped when a step changes the value by less than 1e-16.
#include "simulator/physics/special_functions.hpp"

#include <cmath>
#include <complex>
#include <limits>
#include <numbers>
#include <stdexcept>

namespace echoline::sim {
namespace {

constexpr double kSeriesLimit = 4.0;
constexpr double kEpsilon = 1e-16;
constexpr int kMaxTerms = 1000;

// Si by A&S 5.2.14: sum over n >= 0 of (-1)^n x^(2n+1) / ((2n+1) (2n+1)!).
double si_series(double x) {
  const double x2 = x * x;
  double power = x;  // (-1)^n x^(2n+1) / (2n+1)!
  double sum = x;
  for (int n = 1; n < kMaxTerms; ++n) {
    power *= -x2 / ((2.0 * n) * (2.0 * n + 1.0));
    const double term = power / (2.0 * n + 1.0);
    sum += term;
    if (std::abs(term) < kEpsilon * std::abs(sum)) break;
  }
  return sum;
}

// Cin by A&S 5.2.16: sum over n >= 1 of (-1)^(n+1) x^(2n) / (2n (2n)!).
double cin_series(double x) {
  const double x2 = x * x;
  double power = 1.0;  // (-1)^(n+1) x^(2n) / (2n)!, built up from n = 0 with the opposite sign
  double sum = 0.0;
  for (int n = 1; n < kMaxTerms; ++n) {
    power *= -x2 / ((2.0 * n - 1.0) * (2.0 * n));
    const double term = -power / (2.0 * n);
    sum += term;
    if (std::abs(term) < kEpsilon * std::abs(sum)) break;
  }
  return sum;
}

// E1(ix) for x > 0 by the continued fraction (see the file comment).
std::complex<double> e1_of_imaginary(double x) {
  using C = std::complex<double>;
  constexpr double tiny = std::numeric_limits<double>::min() / std::numeric_limits<double>::epsilon();
  const C z(0.0, x);
  C b = z + 1.0;
  C c = 1.0 / tiny;
  C d = 1.0 / b;
  C h = d;
  for (int i = 1; i < kMaxTerms; ++i) {
    const double a = -static_cast<double>(i) * static_cast<double>(i);
    b += 2.0;
    d = 1.0 / (a * d + b);
    c = b + a / c;
    const C step = c * d;
    h *= step;
    if (std::abs(step - 1.0) < kEpsilon) break;
  }
  return h * std::exp(-z);
}

}  // namespace

double sine_integral(double x) {
  const double ax = std::abs(x);
  double value = 0;
  if (ax <= kSeriesLimit) {
    value = si_series(ax);
  } else {
    value = std::numbers::pi / 2.0 + e1_of_imaginary(ax).imag();
  }
  return x < 0 ? -value : value;
}

double cosine_integral(double x) {
  if (!(x > 0)) throw std::domain_error("cosine_integral: x must be > 0");
  if (x <= kSeriesLimit) return kEulerGamma + std::log(x) - cin_series(x);
  return -e1_of_imaginary(x).real();
}

double cin_integral(double x) {
  const double ax = std::abs(x);
  if (ax <= kSeriesLimit) return cin_series(ax);
  return kEulerGamma + std::log(ax) - cosine_integral(ax);
}

}  // namespace echoline::sim
