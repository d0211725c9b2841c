// Gaussian resolution filter and swept-analyzer sweep time.
#include "simulator/physics/spectrum.hpp"

#include <algorithm>
#include <cmath>

namespace echoline::sim {

// Power response exp(-ln2 * (2*offset/rbw)^2): half power at offset = +-rbw/2.
double rbw_response_db(double offset_hz, double rbw_hz) {
  const double x = 2.0 * offset_hz / rbw_hz;
  return -10.0 * std::log10(2.0) * x * x;
}

// ST = k*span/RBW^2; a video filter narrower than the RBW settles slower, ST = k*span/(RBW*VBW).
double sweep_time_s(double span_hz, double rbw_hz, double vbw_hz, double k) {
  if (!(span_hz > 0) || !(rbw_hz > 0)) return kZeroSpanSweepTimeS;
  const double narrowest = (vbw_hz > 0) ? std::min(rbw_hz, vbw_hz) : rbw_hz;
  return std::max(kMinSweepTimeS, k * span_hz / (rbw_hz * narrowest));
}

}  // namespace echoline::sim
