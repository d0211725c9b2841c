// Ground truth of units: f0 is the true return-loss maximum for both models (the series RLC's
// resonance exactly), depth_db the RL there; the wire model's lossy units are shallow and broad.
#include "simulator/physics/truth.hpp"

#include <cmath>
#include <stdexcept>

#include <gtest/gtest.h>

namespace echoline::sim {
namespace {

const std::filesystem::path kLots = std::filesystem::path(ECHOLINE_SOURCE_DIR) / "config/sim/lots";

// Frequency of the largest true RL on a 1 kHz grid within +-span of `around` (brute force).
double grid_maximum_hz(const SimUnit& u, double around, double span) {
  double best_f = around;
  double best = -1e9;
  for (double f = around - span; f <= around + span; f += 1e3) {
    const double rl = true_return_loss_db(u, f);
    if (rl > best) {
      best = rl;
      best_f = f;
    }
  }
  return best_f;
}

// Width (Hz) of the band where the true RL is within `db` of its best.
double width_within_hz(const SimUnit& u, double f0, double best_db, double db) {
  double lo = f0;
  double hi = f0;
  while (true_return_loss_db(u, lo) > best_db - db && lo > 100e6) lo -= 0.1e6;
  while (true_return_loss_db(u, hi) > best_db - db && hi < 3e9) hi += 0.1e6;
  return hi - lo;
}

TEST(UnitTruth, SeriesRlcF0IsTheSeriesResonanceExactly) {
  const Lot lot = load_lot(kLots / "whip915-lot-a.jsonc");
  for (const SimUnit& u : lot.units) {
    const UnitTruth t = unit_truth(u);
    // |Gamma| of R + jX on 50 ohm with R fixed is least at X = 0, w0 = 1/sqrt(LC) (closed form)
    EXPECT_EQ(t.f0_hz, antenna_f0_hz(u.antenna)) << u.serial;
    EXPECT_EQ(t.depth_db, true_return_loss_db(u, t.f0_hz)) << u.serial;
  }
}

TEST(UnitTruth, WireF0IsTheReturnLossMaximumWithinTenKilohertz) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  int checked = 0;
  for (const SimUnit& u : lot.units) {
    if (u.defect == "open-feed" || u.defect == "shorted-feed" || (u.defect.empty() && checked++ % 20 != 0)) continue;
    const UnitTruth t = unit_truth(u);
    EXPECT_NEAR(t.f0_hz, grid_maximum_hz(u, t.f0_hz, 3e6), 10e3) << u.serial << " " << u.defect;
    EXPECT_GE(t.depth_db, true_return_loss_db(u, t.f0_hz - 10e3)) << u.serial;
    EXPECT_GE(t.depth_db, true_return_loss_db(u, t.f0_hz + 10e3)) << u.serial;
    EXPECT_DOUBLE_EQ(t.depth_db, true_return_loss_db(u, t.f0_hz)) << u.serial;
    // not the element's reactance zero: R rises towards 50 ohm, so a good unit's best match
    // lies above where its total reactance (element and feed pin) crosses zero
    if (u.defect.empty()) {
      EXPECT_GT(wire_monopole_impedance(u.wire, t.f0_hz).imag(), 0.0) << u.serial;
    }
  }
}

TEST(UnitTruth, LossyWireUnitsAreShallowBroadAndOfNominalLength) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  const SimUnit* good = nullptr;
  int lossy = 0;
  for (const SimUnit& u : lot.units) {
    if (u.defect.empty() && good == nullptr) good = &u;
  }
  ASSERT_NE(good, nullptr);
  const UnitTruth g = unit_truth(*good);
  const double good_width = width_within_hz(*good, g.f0_hz, g.depth_db, 1.0);
  for (const SimUnit& u : lot.units) {
    if (u.defect != "lossy") continue;
    ++lossy;
    const UnitTruth t = unit_truth(u);
    // shallow: true best RL roughly 4-9 dB (the lot's lossy_extra_ohm range is chosen for it)
    EXPECT_GT(t.depth_db, 4.0) << u.serial;
    EXPECT_LT(t.depth_db, 9.0) << u.serial;
    // broad: 1 dB below its best spans more than twice the good unit's band
    EXPECT_GT(width_within_hz(u, t.f0_hz, t.depth_db, 1.0), 2 * good_width) << u.serial;
    // displaced low: R above 50 ohm and rising makes the least |Gamma| sit below the good dip
    EXPECT_LT(t.f0_hz, 895e6) << u.serial;
    EXPECT_GT(t.f0_hz, 850e6) << u.serial;
    // their defect is not their length: within 4 sd (0.5 mm) of nominal
    EXPECT_LT(std::abs(element_length_mm(u) - 78.0), 2.0) << u.serial;
  }
  EXPECT_EQ(lossy, 6);
}

TEST(UnitTruth, BrokenFeedUnitsKeepTheirAntennaF0AndHaveNoDepth) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  for (const SimUnit& u : lot.units) {
    if (u.defect != "open-feed" && u.defect != "shorted-feed") continue;
    const UnitTruth t = unit_truth(u);
    EXPECT_NEAR(t.f0_hz, 915e6, 30e6) << u.serial;   // the antenna behind the broken feed
    EXPECT_NEAR(t.depth_db, 0.2, 1e-9) << u.serial;  // make_open_feed / make_shorted_feed: 0.2 dB
  }
}

TEST(UnitTruth, MaximumSearchRejectsAnEmptyRange) {
  const auto d = make_antenna(AntennaParams{.element_length_mm = 78, .nominal_length_mm = 78, .nominal_f0_hz = 915e6,
                                            .q = 9, .resistance_ohm = 45});
  EXPECT_THROW(return_loss_maximum_hz(*d, 900e6, 900e6), std::invalid_argument);
  EXPECT_THROW(return_loss_maximum_hz(*d, 0, 900e6), std::invalid_argument);
  // series RLC: the search lands on the closed-form resonance
  EXPECT_NEAR(return_loss_maximum_hz(*d, 800e6, 1000e6, 1.0), 915e6, 2.0);
}

}  // namespace
}  // namespace echoline::sim
