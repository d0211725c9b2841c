// Lot files -> reproducible simulated units of either antenna model; the DUT each unit
// presents at the test port.
#include "simulator/physics/lot.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <set>
#include <sstream>
#include <stdexcept>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "simulator/physics/lot_file.hpp"

namespace echoline::sim {
namespace {

using lot_file::json;
using lot_file::Reader;
using lot_file::Rng;

const std::vector<std::string>& defect_names() {
  static const std::vector<std::string> names = {"open-feed", "shorted-feed", "too-long",
                                                 "too-short", "lossy",        "intermittent"};
  return names;
}

// Keys every lot may have, and the keys of each model (a key of the other model is refused
// by name, so a series-RLC "q" in a wire lot cannot be silently ignored).
const std::set<std::string>& common_keys() {
  static const std::set<std::string> keys = {
      "name", "description", "model", "count", "serial_pattern", "first_number", "seed", "nominal_length_mm",
      "length_spread_mm", "defects", "too_long_mm", "too_short_mm", "lossy_extra_ohm"};
  return keys;
}
const std::set<std::string>& rlc_keys() {
  static const std::set<std::string> keys = {"nominal_f0_hz", "q", "q_spread", "resistance_ohm", "resistance_spread_ohm"};
  return keys;
}
const std::set<std::string>& wire_keys() {
  static const std::set<std::string> keys = {"wire_diameter_mm", "wire_diameter_spread_mm", "loss_resistance_ohm",
                                             "loss_resistance_spread_ohm", "feed_inductance_nh"};
  return keys;
}

int line_of_byte(std::string_view text, std::size_t byte) {
  byte = std::min(byte, text.size());
  return 1 + static_cast<int>(std::count(text.begin(), text.begin() + static_cast<std::ptrdiff_t>(byte), '\n'));
}

// An intermittent feed: each sweep it is either the good antenna or an open feed, chosen from
// (seed, serial, sweep index) so a rerun of the same sweeps sees the same pattern.
class IntermittentUnit final : public Dut {
 public:
  IntermittentUnit(std::unique_ptr<Dut> good, std::uint64_t key)
      : good_(std::move(good)), open_(make_open_feed()), key_(key) {
    on_sweep(0);
  }
  Complex gamma(double f) const override { return (is_open_ ? open_ : good_)->gamma(f); }
  std::string describe() const override {
    return fmt::format("intermittent feed (now {}): {}", is_open_ ? "open" : "good", good_->describe());
  }
  void on_sweep(std::uint64_t sweep_index) override {
    is_open_ = (lot_file::mix(key_ ^ lot_file::mix(sweep_index)) >> 63) != 0;
  }

 private:
  std::unique_ptr<Dut> good_;
  std::unique_ptr<Dut> open_;
  std::uint64_t key_;
  bool is_open_ = false;
};

// The model-specific part of a lot file, read once; draw() makes one unit's antenna from
// four normal/uniform draws taken in a fixed order (length, then two model parameters, then
// the defect's extent) whatever the model and the defect.
struct RlcDesign {
  double nominal_f0, q, q_spread, resistance, resistance_spread;
};
struct WireDesign {
  double diameter, diameter_spread, loss, loss_spread, feed_nh;
};

}  // namespace

std::string_view model_name(AntennaModel m) { return m == AntennaModel::wire_monopole ? "wire-monopole" : "series-rlc"; }

double element_length_mm(const SimUnit& u) {
  return u.model == AntennaModel::wire_monopole ? u.wire.element_length_mm : u.antenna.element_length_mm;
}

double nominal_length_mm(const SimUnit& u) {
  return u.model == AntennaModel::wire_monopole ? u.wire.nominal_length_mm : u.antenna.nominal_length_mm;
}

const SimUnit* Lot::find(std::string_view serial) const {
  for (const SimUnit& u : units) {
    if (u.serial == serial) return &u;
  }
  return nullptr;
}

Lot parse_lot(std::string_view text, const std::string& file_name) {
  json root;
  try {
    root = json::parse(text, nullptr, true, /*ignore_comments=*/true);
  } catch (const json::parse_error& e) {
    throw std::runtime_error(fmt::format("{}: line {}: not valid JSON: {}", file_name, line_of_byte(text, e.byte), e.what()));
  }
  if (!root.is_object()) throw std::runtime_error(fmt::format("{}: (top level): expected an object", file_name));
  const Reader r(root, file_name);

  AntennaModel model = AntennaModel::series_rlc;
  if (const json* m = r.find("model")) {
    const std::string name = m->is_string() ? m->get<std::string>() : std::string();
    if (name == "wire-monopole") {
      model = AntennaModel::wire_monopole;
    } else if (name != "series-rlc") {
      r.fail("model", "expected \"series-rlc\" (the default) or \"wire-monopole\"");
    }
  }
  const bool wire = model == AntennaModel::wire_monopole;
  for (const auto& [key, value] : root.items()) {
    if (common_keys().contains(key) || (wire ? wire_keys() : rlc_keys()).contains(key)) continue;
    if ((wire ? rlc_keys() : wire_keys()).contains(key)) {
      r.fail(key, fmt::format("a key of model {}, not of model {}", wire ? "series-rlc" : "wire-monopole", model_name(model)));
    }
    r.fail(key, "unknown key");
  }

  Lot lot;
  lot.name = r.string("name");
  const auto count = static_cast<std::size_t>(r.unsigned_integer("count", 1, 100000));
  const std::string pattern = r.string("serial_pattern");
  const std::uint64_t first = r.unsigned_integer("first_number", 0, 1'000'000'000, 1);
  lot.seed = r.unsigned_integer("seed", 0, std::numeric_limits<std::uint64_t>::max());
  const double nominal_length = r.number("nominal_length_mm", 1e-3, 1e5);
  RlcDesign rlc{};
  WireDesign wd{};
  double spread = 0;
  std::pair<double, double> lossy;
  if (wire) {
    spread = r.number("length_spread_mm", 0, nominal_length / 10);
    wd.diameter = r.number("wire_diameter_mm", 1e-3, nominal_length / 1.5);
    wd.diameter_spread = r.number("wire_diameter_spread_mm", 0, wd.diameter / 4, 0.0);
    wd.loss = r.number("loss_resistance_ohm", 0, 1e3, 0.0);
    wd.loss_spread = r.number("loss_resistance_spread_ohm", 0, std::max(wd.loss, 0.0), 0.0);
    wd.feed_nh = r.number("feed_inductance_nh", 0, 1e3, 0.0);
    lossy = r.range("lossy_extra_ohm", 0, 1e5, {80.0, 160.0});
  } else {
    rlc.nominal_f0 = r.number("nominal_f0_hz", 1e3, 1e12);
    spread = r.number("length_spread_mm", 0, nominal_length / 10);
    rlc.q = r.number("q", 0.5, 1000);
    rlc.q_spread = r.number("q_spread", 0, 0.3, 0.0);
    rlc.resistance = r.number("resistance_ohm", 0.1, 1e4);
    rlc.resistance_spread = r.number("resistance_spread_ohm", 0, rlc.resistance / 4, 0.0);
    lossy = r.range("lossy_extra_ohm", 0, 1e5, {2 * rlc.resistance, 4 * rlc.resistance});
  }
  const auto too_long = r.range("too_long_mm", 0, nominal_length, {4 * spread, 6 * spread});
  const auto too_short = r.range("too_short_mm", 0, nominal_length / 2, {4 * spread, 6 * spread});

  // Defect labels: round(fraction * count) units of each, placed at shuffled positions.
  std::vector<std::string> labels;
  if (const json* defects = r.find("defects")) {
    if (!defects->is_object()) r.fail("defects", "expected an object of defect name -> fraction of the lot");
    for (const auto& [name, value] : defects->items()) {
      const std::string key = "defects." + name;
      if (std::find(defect_names().begin(), defect_names().end(), name) == defect_names().end()) {
        r.fail(key, "unknown defect (known: open-feed, shorted-feed, too-long, too-short, lossy, intermittent)");
      }
      const double fraction = r.checked_number(value, key, 0, 1);
      labels.insert(labels.end(), static_cast<std::size_t>(std::llround(fraction * static_cast<double>(count))), name);
    }
  }
  if (labels.size() > count) r.fail("defects", fmt::format("fractions add up to {} units, more than count {}", labels.size(), count));
  labels.resize(count);

  Rng rng(lot.seed);
  for (std::size_t i = count; i > 1; --i) std::swap(labels[i - 1], labels[rng.below(i)]);  // Fisher-Yates

  std::set<std::string> serials;
  lot.units.reserve(count);
  for (std::size_t i = 0; i < count; ++i) {
    SimUnit u;
    try {
      u.serial = fmt::format(fmt::runtime(pattern), first + i);
    } catch (const fmt::format_error& e) {
      r.fail("serial_pattern", fmt::format("not a usable pattern for a number ({}); e.g. \"WH915A-{{:04d}}\"", e.what()));
    }
    if (!serials.insert(u.serial).second) {
      r.fail("serial_pattern", fmt::format("gives serial \"{}\" twice; it needs a number placeholder like {{:04d}}", u.serial));
    }
    u.defect = labels[i];
    u.model = model;
    // Fixed draw order per unit (length, two model parameters, defect extent) whatever the defect.
    const double length_draw = rng.normal();
    const double second_draw = rng.normal();
    const double third_draw = rng.normal();
    const double defect_draw = rng.uniform();
    double length = nominal_length + spread * length_draw;
    if (u.defect == "too-long") {
      length = nominal_length + too_long.first + (too_long.second - too_long.first) * defect_draw;
    } else if (u.defect == "too-short") {
      length = nominal_length - too_short.first - (too_short.second - too_short.first) * defect_draw;
    }
    const double extra = u.defect == "lossy" ? lossy.first + (lossy.second - lossy.first) * defect_draw : 0.0;
    if (!(length > 0)) r.fail("too_short_mm", fmt::format("unit {} would have no element left", u.serial));
    if (wire) {
      u.wire.nominal_length_mm = nominal_length;
      u.wire.element_length_mm = length;
      u.wire.wire_diameter_mm = std::max(0.1 * wd.diameter, wd.diameter + wd.diameter_spread * second_draw);
      u.wire.loss_resistance_ohm = std::max(0.0, wd.loss + wd.loss_spread * third_draw);
      u.wire.extra_loss_ohm = extra;
      u.wire.feed_inductance_nh = wd.feed_nh;
      if (!(length / u.wire.wire_diameter_mm > 1.4)) {
        r.fail("wire_diameter_mm", fmt::format("unit {}: the element must be longer than 1.4 wire diameters", u.serial));
      }
    } else {
      u.antenna.nominal_length_mm = nominal_length;
      u.antenna.nominal_f0_hz = rlc.nominal_f0;
      u.antenna.element_length_mm = length;
      u.antenna.q = std::max(0.5, rlc.q * (1.0 + rlc.q_spread * second_draw));
      u.antenna.resistance_ohm = std::max(0.1, rlc.resistance + rlc.resistance_spread * third_draw);
      u.antenna.extra_series_ohm = extra;
    }
    lot.units.push_back(std::move(u));
  }
  return lot;
}

Lot load_lot(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw std::runtime_error(fmt::format("{}: (file): cannot open for reading", file.string()));
  std::ostringstream text;
  text << in.rdbuf();
  return parse_lot(text.str(), file.string());
}

std::unique_ptr<Dut> make_unit_antenna(const SimUnit& unit) {
  if (unit.model == AntennaModel::wire_monopole) return make_wire_monopole(unit.wire);
  return make_antenna(unit.antenna);
}

std::unique_ptr<Dut> make_unit_dut(const SimUnit& unit, std::uint64_t seed) {
  if (unit.defect == "open-feed") return make_open_feed();
  if (unit.defect == "shorted-feed") return make_shorted_feed();
  if (unit.defect == "intermittent") {
    return std::make_unique<IntermittentUnit>(make_unit_antenna(unit), lot_file::mix(seed ^ lot_file::fnv1a(unit.serial)));
  }
  return make_unit_antenna(unit);  // good, too-long, too-short, lossy: the parameters say it all
}

double true_return_loss_db(const SimUnit& unit, double frequency_hz) {
  const std::unique_ptr<Dut> dut = unit.defect == "intermittent" ? make_unit_antenna(unit) : make_unit_dut(unit, 0);
  return -20.0 * std::log10(std::abs(dut->gamma(frequency_hz)));
}

}  // namespace echoline::sim
