// Lot files: shipped lots load, units are reproducible from the seed, defect mix counts are
// exact, the DUT of each unit behaves as its defect says, bad files name file and key.
#include "simulator/physics/lot.hpp"

#include <cmath>
#include <map>
#include <numeric>
#include <stdexcept>
#include <string>

#include <gtest/gtest.h>

namespace echoline::sim {
namespace {

const std::filesystem::path kLots = std::filesystem::path(ECHOLINE_SOURCE_DIR) / "config/sim/lots";

std::map<std::string, int> defect_counts(const Lot& lot) {
  std::map<std::string, int> counts;
  for (const SimUnit& u : lot.units) ++counts[u.defect];
  return counts;
}

std::string minimal_lot(const std::string& extra = "", std::uint64_t seed = 7) {
  return R"({ "name": "t", "count": 50, "serial_pattern": "T-{:03d}", "seed": )" + std::to_string(seed) +
         R"(, "nominal_length_mm": 78, "nominal_f0_hz": 915e6, "length_spread_mm": 1.0,
              "q": 9, "resistance_ohm": 45 )" + extra + "}";
}

// parse_lot must throw std::runtime_error whose message contains every fragment.
void expect_lot_error(const std::string& text, std::initializer_list<std::string> fragments) {
  try {
    parse_lot(text, "bad-lot.jsonc");
    ADD_FAILURE() << "no error for: " << text;
  } catch (const std::runtime_error& e) {
    const std::string message = e.what();
    EXPECT_NE(message.find("bad-lot.jsonc: "), std::string::npos) << message;
    for (const std::string& f : fragments) EXPECT_NE(message.find(f), std::string::npos) << message << " lacks " << f;
  }
}

TEST(PhysicsLot, WhipLotLoadsWithSerialsInOrder) {
  const Lot lot = load_lot(kLots / "whip915-lot-a.jsonc");
  EXPECT_EQ(lot.name, "whip915-lot-a");
  ASSERT_EQ(lot.units.size(), 240u);
  EXPECT_EQ(lot.units.front().serial, "WH915A-0001");
  EXPECT_EQ(lot.units.back().serial, "WH915A-0240");
  const SimUnit* u = lot.find("WH915A-0117");
  ASSERT_NE(u, nullptr);
  EXPECT_EQ(u->serial, "WH915A-0117");
  EXPECT_EQ(lot.find("WH915A-0241"), nullptr);
  EXPECT_EQ(lot.find(""), nullptr);
}

TEST(PhysicsLot, DefectMixGivesRoundedCountsOfEachDefect) {
  const Lot whip = load_lot(kLots / "whip915-lot-a.jsonc");
  // round(fraction * 240) per defect, as written in the lot file
  const std::map<std::string, int> expected = {{"", 231},      {"open-feed", 1}, {"shorted-feed", 1}, {"too-long", 2},
                                               {"too-short", 2}, {"lossy", 2},    {"intermittent", 1}};
  EXPECT_EQ(defect_counts(whip), expected);

  const Lot tiny = load_lot(kLots / "tiny-lot.jsonc");
  ASSERT_EQ(tiny.units.size(), 12u);
  const std::map<std::string, int> one_each = {{"", 6},          {"open-feed", 1}, {"shorted-feed", 1}, {"too-long", 1},
                                               {"too-short", 1}, {"lossy", 1},     {"intermittent", 1}};
  EXPECT_EQ(defect_counts(tiny), one_each);

  const Lot ism = load_lot(kLots / "ism2g4-lot-b.jsonc");
  ASSERT_EQ(ism.units.size(), 100u);
  EXPECT_EQ(defect_counts(ism)["lossy"], 2);
  EXPECT_EQ(defect_counts(ism)["intermittent"], 0);
}

TEST(PhysicsLot, SameSeedGivesTheSameUnitsAndAnotherSeedDoesNot) {
  const Lot a = parse_lot(minimal_lot(R"(, "defects": {"lossy": 0.1, "too-long": 0.1})"), "a");
  const Lot b = parse_lot(minimal_lot(R"(, "defects": {"lossy": 0.1, "too-long": 0.1})"), "b");
  const Lot c = parse_lot(minimal_lot(R"(, "defects": {"lossy": 0.1, "too-long": 0.1})", 8), "c");
  ASSERT_EQ(a.units.size(), b.units.size());
  int differing = 0;
  for (std::size_t i = 0; i < a.units.size(); ++i) {
    EXPECT_EQ(a.units[i].serial, b.units[i].serial);
    EXPECT_EQ(a.units[i].defect, b.units[i].defect);
    EXPECT_EQ(a.units[i].antenna.element_length_mm, b.units[i].antenna.element_length_mm);
    EXPECT_EQ(a.units[i].antenna.q, b.units[i].antenna.q);
    EXPECT_EQ(a.units[i].antenna.extra_series_ohm, b.units[i].antenna.extra_series_ohm);
    if (a.units[i].antenna.element_length_mm != c.units[i].antenna.element_length_mm) ++differing;
  }
  EXPECT_EQ(differing, 50);
  EXPECT_EQ(defect_counts(a), defect_counts(c));  // counts come from fractions, placement from the seed
}

TEST(PhysicsLot, LengthSpreadMatchesTheLotFile) {
  const Lot lot = load_lot(kLots / "whip915-lot-a.jsonc");
  std::vector<double> lengths;
  int tuned_off = 0;
  for (const SimUnit& u : lot.units) {
    if (!u.defect.empty()) continue;
    lengths.push_back(u.antenna.element_length_mm);
    // more than 10 MHz off 915 MHz: outside the whip915 recipe's 905-925 MHz resonance window
    if (std::abs(antenna_f0_hz(u.antenna) - 915e6) > 10e6) ++tuned_off;
  }
  const double mean = std::accumulate(lengths.begin(), lengths.end(), 0.0) / static_cast<double>(lengths.size());
  double var = 0;
  for (double l : lengths) var += (l - mean) * (l - mean);
  const double sd = std::sqrt(var / static_cast<double>(lengths.size() - 1));
  // 231 normal draws: sample mean within ~3 standard errors, sample sd within ~20 % (sampling statistics)
  EXPECT_NEAR(mean, 78.0, 0.2);
  EXPECT_NEAR(sd, 0.5, 0.1);
  // a few percent tuned off among good-feed units: 0.5 mm is 5.9 MHz at 78 mm / 915 MHz, so
  // 10 MHz is 1.7 sd, about 9 % of a normal population (231 draws: 21 expected)
  EXPECT_GE(tuned_off, 8);
  EXPECT_LE(tuned_off, 40);
}

TEST(PhysicsLot, WhipNominalLengthIsAShortenedQuarterWave) {
  const Lot lot = load_lot(kLots / "whip915-lot-a.jsonc");
  // lambda/4 at 915 MHz from c = 299 792 458 m/s (exact) = 81.9105 mm (computed)
  const double quarter_wave_mm = 299792458.0 / 915e6 / 4 * 1e3;
  EXPECT_NEAR(quarter_wave_mm, 81.9105, 1e-4);
  // end-effect factor K ~ 0.90-0.98 (ARRL Antenna Book, length-vs-diameter chart [memory])
  const double k = lot.units.front().antenna.nominal_length_mm / quarter_wave_mm;
  EXPECT_GT(k, 0.90);
  EXPECT_LT(k, 0.98);
}

TEST(PhysicsLot, DefectiveUnitsHaveTheirDefectInTheirParameters) {
  const Lot lot = load_lot(kLots / "whip915-lot-a.jsonc");
  for (const SimUnit& u : lot.units) {
    const double len = u.antenna.element_length_mm;
    if (u.defect == "too-long") {
      EXPECT_GE(len, 82.0) << u.serial;
      EXPECT_LE(len, 85.0) << u.serial;
    } else if (u.defect == "too-short") {
      EXPECT_GE(len, 71.0) << u.serial;
      EXPECT_LE(len, 74.0) << u.serial;
    } else if (u.defect == "lossy") {
      EXPECT_GE(u.antenna.extra_series_ohm, 60.0) << u.serial;
      EXPECT_LE(u.antenna.extra_series_ohm, 150.0) << u.serial;
    } else {
      EXPECT_EQ(u.antenna.extra_series_ohm, 0.0) << u.serial;
    }
  }
}

TEST(PhysicsLot, TrueReturnLossFollowsTheDefect) {
  const Lot lot = load_lot(kLots / "tiny-lot.jsonc");
  for (const SimUnit& u : lot.units) {
    const double f0 = antenna_f0_hz(u.antenna);
    if (u.defect == "open-feed" || u.defect == "shorted-feed") {
      for (double f = 850e6; f <= 980e6; f += 10e6) EXPECT_LT(true_return_loss_db(u, f), 0.5) << u.serial;
    } else {
      // the dip sits at the unit's own f0 = nominal_f0 * L_nom / L (f proportional to 1/length)
      EXPECT_GT(true_return_loss_db(u, f0), true_return_loss_db(u, f0 - 2e6)) << u.serial;
      EXPECT_GT(true_return_loss_db(u, f0), true_return_loss_db(u, f0 + 2e6)) << u.serial;
    }
    if (u.defect.empty() || u.defect == "intermittent") { EXPECT_GT(true_return_loss_db(u, f0), 20.0) << u.serial; }
    if (u.defect == "lossy") { EXPECT_LT(true_return_loss_db(u, f0), 8.0) << u.serial; }
    if (u.defect == "too-long") { EXPECT_LT(f0, 870e6) << u.serial; }
    if (u.defect == "too-short") { EXPECT_GT(f0, 960e6) << u.serial; }
  }
}

TEST(PhysicsLot, IntermittentUnitSwitchesBetweenGoodAndOpenFromSweepToSweep) {
  const Lot lot = load_lot(kLots / "tiny-lot.jsonc");
  const SimUnit* unit = nullptr;
  for (const SimUnit& u : lot.units) {
    if (u.defect == "intermittent") unit = &u;
  }
  ASSERT_NE(unit, nullptr);
  const double f0 = antenna_f0_hz(unit->antenna);
  auto pattern = [&](std::uint64_t seed) {
    const auto dut = make_unit_dut(*unit, seed);
    std::string states;
    for (std::uint64_t sweep = 0; sweep < 64; ++sweep) {
      dut->on_sweep(sweep);
      const double rl = -20 * std::log10(std::abs(dut->gamma(f0)));
      EXPECT_TRUE(rl < 0.5 || std::abs(rl - true_return_loss_db(*unit, f0)) < 1e-9) << rl;
      states += rl < 0.5 ? 'o' : 'g';
    }
    return states;
  };
  const std::string first = pattern(lot.seed);
  EXPECT_NE(first.find('o'), std::string::npos) << first;
  EXPECT_NE(first.find('g'), std::string::npos) << first;
  EXPECT_EQ(pattern(lot.seed), first);      // seeded: reproducible
  EXPECT_NE(pattern(lot.seed + 1), first);  // another seed, another pattern
}

TEST(PhysicsLot, UnitDutForGoodUnitIsItsAntenna) {
  const Lot lot = load_lot(kLots / "tiny-lot.jsonc");
  for (const SimUnit& u : lot.units) {
    if (!u.defect.empty()) continue;
    const auto dut = make_unit_dut(u, lot.seed);
    const auto reference = make_antenna(u.antenna);
    EXPECT_EQ(dut->gamma(915e6), reference->gamma(915e6)) << u.serial;
  }
}

TEST(PhysicsLot, BadLotFilesNameFileAndKey) {
  expect_lot_error(R"({ "name": "t" })", {"count", "missing"});
  expect_lot_error(minimal_lot(R"(, "defects": {"melted": 0.1})"), {"defects.melted", "unknown defect"});
  expect_lot_error(minimal_lot(R"(, "defects": {"lossy": 0.7, "open-feed": 0.5})"), {"defects", "more than count"});
  expect_lot_error(minimal_lot(R"(, "defects": {"lossy": 1.5})"), {"defects.lossy", "outside"});
  expect_lot_error(minimal_lot(R"(, "colour": "red")"), {"colour", "unknown key"});
  expect_lot_error(minimal_lot(R"(, "too_long_mm": [5, 3])"), {"too_long_mm", "min is greater"});
  expect_lot_error(minimal_lot(R"(, "too_long_mm": 5)"), {"too_long_mm", "[min, max]"});
  std::string fixed = minimal_lot();
  fixed.replace(fixed.find("T-{:03d}"), 8, "FIXED");
  expect_lot_error(fixed, {"serial_pattern", "twice"});
  std::string broken = minimal_lot();
  broken.replace(broken.find("T-{:03d}"), 8, "T-{:q}");
  expect_lot_error(broken, {"serial_pattern", "not a usable pattern"});
  std::string negative_q = minimal_lot();
  negative_q.replace(negative_q.find("\"q\": 9"), 6, "\"q\": -9");
  expect_lot_error(negative_q, {"q: ", "outside"});
  expect_lot_error("{\n \"name\": \"t\",\n \"count\": 3,,\n}", {"line 3", "not valid JSON"});
  expect_lot_error("[1, 2]", {"expected an object"});
}

TEST(PhysicsLot, MissingFileIsNamed) {
  try {
    load_lot("/nonexistent/lot.jsonc");
    FAIL() << "no error";
  } catch (const std::runtime_error& e) {
    EXPECT_NE(std::string(e.what()).find("/nonexistent/lot.jsonc"), std::string::npos) << e.what();
  }
}

}  // namespace
}  // namespace echoline::sim
