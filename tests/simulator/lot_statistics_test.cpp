// The two 600-unit production lots (one per antenna model): they parse, repeat from their seed,
// carry 1 % of each defect, and their good units have the figures written in the lot files.
// Also: the "model" key and the per-model keys of a lot file.
#include <cmath>
#include <map>
#include <numeric>
#include <stdexcept>
#include <string>
#include <vector>

#include <gtest/gtest.h>

#include "simulator/physics/lot.hpp"
#include "simulator/physics/truth.hpp"

namespace echoline::sim {
namespace {

const std::filesystem::path kLots = std::filesystem::path(ECHOLINE_SOURCE_DIR) / "config/sim/lots";

struct GoodUnitFigures {
  int good = 0;
  int within_10_mhz = 0;  // true f0 within 905-925 MHz
  int mask_pass = 0;      // true RL >= 10 dB over 902-928 MHz
  double mean_f0 = 0, sd_f0 = 0;
  std::map<std::string, int> defects;
};

GoodUnitFigures figures_of(const Lot& lot) {
  GoodUnitFigures fig;
  std::vector<double> f0s;
  for (const SimUnit& u : lot.units) {
    ++fig.defects[u.defect];
    if (!u.defect.empty()) continue;
    ++fig.good;
    const double f0 = unit_truth(u).f0_hz;
    f0s.push_back(f0);
    if (std::abs(f0 - 915e6) <= 10e6) ++fig.within_10_mhz;
    bool pass = true;
    for (double f = 902e6; f <= 928e6 + 1; f += 0.5e6) pass = pass && true_return_loss_db(u, f) >= 10.0;
    if (pass) ++fig.mask_pass;
  }
  fig.mean_f0 = std::accumulate(f0s.begin(), f0s.end(), 0.0) / static_cast<double>(f0s.size());
  double var = 0;
  for (double f : f0s) var += (f - fig.mean_f0) * (f - fig.mean_f0);
  fig.sd_f0 = std::sqrt(var / static_cast<double>(f0s.size() - 1));
  return fig;
}

void expect_one_percent_each(const GoodUnitFigures& fig) {
  // round(0.01 * 600) = 6 units of each defect, as written in the lot files
  const std::map<std::string, int> expected = {{"", 564},        {"open-feed", 6}, {"shorted-feed", 6}, {"too-long", 6},
                                               {"too-short", 6}, {"lossy", 6},     {"intermittent", 6}};
  EXPECT_EQ(fig.defects, expected);
}

TEST(LotStatistics, SeriesRlcLotHasTheFiguresOfItsFile) {
  const Lot lot = load_lot(kLots / "whip915-rlc-600.jsonc");
  EXPECT_EQ(lot.name, "whip915-rlc-600");
  ASSERT_EQ(lot.units.size(), 600u);
  EXPECT_EQ(lot.units.front().model, AntennaModel::series_rlc);
  const GoodUnitFigures fig = figures_of(lot);
  expect_one_percent_each(fig);
  // Lot file comment: 510 of 564 within 915 +- 10 MHz, all 564 pass the mask, mean 915.2, sd 6.0
  EXPECT_EQ(fig.within_10_mhz, 510);
  EXPECT_EQ(fig.mask_pass, 564);
  EXPECT_NEAR(fig.mean_f0 / 1e6, 915.2, 0.05);
  EXPECT_NEAR(fig.sd_f0 / 1e6, 6.0, 0.05);
  // 0.5 mm of 78 mm is 5.9 MHz at 915 MHz (f proportional to 1/length): the sample sd of 564
  // draws lies within ~10 % of it (sampling statistics)
  EXPECT_NEAR(fig.sd_f0 / 1e6, 915.0 * 0.5 / 78.0, 0.6);
}

TEST(LotStatistics, WireLotHasTheFiguresOfItsFile) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  EXPECT_EQ(lot.name, "whip915-wire-600");
  ASSERT_EQ(lot.units.size(), 600u);
  EXPECT_EQ(lot.units.front().model, AntennaModel::wire_monopole);
  EXPECT_EQ(lot.units.front().antenna.q, 0.0);  // no series-RLC parameters in a wire lot
  const GoodUnitFigures fig = figures_of(lot);
  expect_one_percent_each(fig);
  // Lot file comment: 511 of 564 within 915 +- 10 MHz, all 564 pass the mask, mean 915.7, sd 5.8
  EXPECT_EQ(fig.within_10_mhz, 511);
  EXPECT_EQ(fig.mask_pass, 564);
  EXPECT_NEAR(fig.mean_f0 / 1e6, 915.7, 0.05);
  EXPECT_NEAR(fig.sd_f0 / 1e6, 5.8, 0.05);
}

TEST(LotStatistics, LotsRepeatFromTheirSeed) {
  for (const char* name : {"whip915-rlc-600.jsonc", "whip915-wire-600.jsonc"}) {
    const Lot a = load_lot(kLots / name);
    const Lot b = load_lot(kLots / name);
    ASSERT_EQ(a.units.size(), b.units.size());
    for (std::size_t i = 0; i < a.units.size(); ++i) {
      EXPECT_EQ(a.units[i].serial, b.units[i].serial);
      EXPECT_EQ(a.units[i].defect, b.units[i].defect);
      EXPECT_EQ(element_length_mm(a.units[i]), element_length_mm(b.units[i]));
      EXPECT_EQ(a.units[i].wire.wire_diameter_mm, b.units[i].wire.wire_diameter_mm);
      EXPECT_EQ(a.units[i].wire.extra_loss_ohm, b.units[i].wire.extra_loss_ohm);
      EXPECT_EQ(a.units[i].antenna.q, b.units[i].antenna.q);
    }
  }
}

TEST(LotStatistics, WireUnitsCarryTheirDefectInTheirParameters) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  for (const SimUnit& u : lot.units) {
    const double len = element_length_mm(u);
    EXPECT_EQ(nominal_length_mm(u), 78.0);
    EXPECT_EQ(u.wire.feed_inductance_nh, 0.8);
    if (u.defect == "too-long") {
      EXPECT_GE(len, 82.0) << u.serial;
      EXPECT_LE(len, 85.0) << u.serial;
    } else if (u.defect == "too-short") {
      EXPECT_GE(len, 71.0) << u.serial;
      EXPECT_LE(len, 74.0) << u.serial;
    } else if (u.defect == "lossy") {
      EXPECT_GE(u.wire.extra_loss_ohm, 80.0) << u.serial;
      EXPECT_LE(u.wire.extra_loss_ohm, 180.0) << u.serial;
    } else {
      EXPECT_EQ(u.wire.extra_loss_ohm, 0.0) << u.serial;
    }
  }
}

std::string wire_lot(const std::string& extra = "") {
  return R"({ "name": "w", "model": "wire-monopole", "count": 20, "serial_pattern": "W-{:03d}", "seed": 3,
              "nominal_length_mm": 78, "length_spread_mm": 0.5, "wire_diameter_mm": 1.3 )" + extra + "}";
}

void expect_lot_error(const std::string& text, std::initializer_list<std::string> fragments) {
  try {
    parse_lot(text, "bad-lot.jsonc");
    ADD_FAILURE() << "no error for: " << text;
  } catch (const std::runtime_error& e) {
    const std::string message = e.what();
    for (const std::string& f : fragments) EXPECT_NE(message.find(f), std::string::npos) << message << " lacks " << f;
  }
}

TEST(LotStatistics, ModelKeySelectsThePhysicsAndRefusesTheOtherModelsKeys) {
  const Lot w = parse_lot(wire_lot(), "w");
  EXPECT_EQ(w.units.at(0).model, AntennaModel::wire_monopole);
  EXPECT_EQ(w.units.at(0).wire.loss_resistance_ohm, 0.0);   // optional keys default to 0
  EXPECT_EQ(w.units.at(0).wire.feed_inductance_nh, 0.0);
  EXPECT_EQ(model_name(w.units.at(0).model), "wire-monopole");
  // no "model": series-rlc, today's lots unchanged
  EXPECT_EQ(load_lot(kLots / "whip915-lot-a.jsonc").units.at(0).model, AntennaModel::series_rlc);
  expect_lot_error(wire_lot(R"(, "q": 9)"), {"bad-lot.jsonc: q: ", "series-rlc", "wire-monopole"});
  expect_lot_error(wire_lot(R"(, "nominal_f0_hz": 915e6)"), {"nominal_f0_hz", "a key of model series-rlc"});
  expect_lot_error(wire_lot(R"(, "wire_colour": "red")"), {"wire_colour", "unknown key"});
  std::string no_diameter = wire_lot();
  no_diameter.replace(no_diameter.find(R"(, "wire_diameter_mm": 1.3)"), 25, "");
  expect_lot_error(no_diameter, {"wire_diameter_mm", "missing"});
  std::string helix = wire_lot();
  helix.replace(helix.find("wire-monopole"), 13, "helix");
  expect_lot_error(helix, {"model", "series-rlc", "wire-monopole"});
  const std::string rlc = R"({ "name": "r", "count": 5, "serial_pattern": "R-{:02d}", "seed": 1, "nominal_length_mm": 78,
      "nominal_f0_hz": 915e6, "length_spread_mm": 0.5, "q": 9, "resistance_ohm": 45, "wire_diameter_mm": 1.3 })";
  expect_lot_error(rlc, {"wire_diameter_mm", "a key of model wire-monopole, not of model series-rlc"});
  expect_lot_error(wire_lot(R"(, "wire_diameter_spread_mm": 1.0)"), {"wire_diameter_spread_mm", "outside"});
}

TEST(LotStatistics, WireUnitDutIsItsMonopole) {
  const Lot lot = load_lot(kLots / "whip915-wire-600.jsonc");
  for (const SimUnit& u : lot.units) {
    if (!u.defect.empty()) continue;
    EXPECT_EQ(make_unit_dut(u, lot.seed)->gamma(915e6), make_wire_monopole(u.wire)->gamma(915e6)) << u.serial;
  }
}

}  // namespace
}  // namespace echoline::sim
