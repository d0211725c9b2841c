// Lot files -> reproducible simulated units; the DUT each unit presents at the test port.
#include "simulator/physics/lot.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <limits>
#include <map>
#include <numbers>
#include <optional>
#include <set>
#include <sstream>
#include <stdexcept>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

namespace echoline::sim {
namespace {

using nlohmann::json;

const std::vector<std::string>& defect_names() {
  static const std::vector<std::string> names = {"open-feed", "shorted-feed", "too-long",
                                                 "too-short", "lossy",        "intermittent"};
  return names;
}

// SplitMix64 (Steele, Lea & Flood 2014): a portable generator, so the same seed gives the same
// units with any standard library (std:: distributions are implementation-defined).
std::uint64_t splitmix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

std::uint64_t mix(std::uint64_t value) { return splitmix64(value); }

class Rng {
 public:
  explicit Rng(std::uint64_t seed) : state_(seed) {}
  double uniform() { return static_cast<double>(splitmix64(state_) >> 11) * 0x1.0p-53; }  // [0, 1)
  double uniform(double lo, double hi) { return lo + (hi - lo) * uniform(); }
  double normal() {  // Box-Muller, one value per call
    const double u1 = 1.0 - uniform();  // (0, 1]
    const double u2 = uniform();
    return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * std::numbers::pi * u2);
  }
  std::size_t below(std::size_t n) { return static_cast<std::size_t>(uniform() * static_cast<double>(n)); }

 private:
  std::uint64_t state_;
};

std::uint64_t fnv1a(std::string_view text) {
  std::uint64_t h = 0xcbf29ce484222325ull;
  for (unsigned char c : text) h = (h ^ c) * 0x100000001b3ull;
  return h;
}

// Reads typed keys from the lot object; every failure names the file and the key.
class Reader {
 public:
  Reader(const json& root, std::string file) : root_(root), file_(std::move(file)) {}

  [[noreturn]] void fail(const std::string& key, const std::string& message) const {
    throw std::runtime_error(fmt::format("{}: {}: {}", file_, key, message));
  }

  const json* find(const std::string& key) const {
    const auto it = root_.find(key);
    return it == root_.end() ? nullptr : &*it;
  }
  const json& need(const std::string& key) const {
    const json* v = find(key);
    if (v == nullptr) fail(key, "missing (required)");
    return *v;
  }
  std::string string(const std::string& key) const {
    const json& v = need(key);
    if (!v.is_string() || v.get<std::string>().empty()) fail(key, "expected a non-empty string");
    return v.get<std::string>();
  }
  double number(const std::string& key, double lo, double hi, std::optional<double> fallback = std::nullopt) const {
    const json* v = find(key);
    if (v == nullptr) {
      if (fallback) return *fallback;
      fail(key, "missing (required)");
    }
    return checked_number(*v, key, lo, hi);
  }
  double checked_number(const json& v, const std::string& key, double lo, double hi) const {
    if (!v.is_number()) fail(key, "expected a number");
    const double x = v.get<double>();
    if (!(x >= lo && x <= hi)) fail(key, fmt::format("{} is outside {} .. {}", x, lo, hi));
    return x;
  }
  std::uint64_t unsigned_integer(const std::string& key, std::uint64_t lo, std::uint64_t hi,
                                 std::optional<std::uint64_t> fallback = std::nullopt) const {
    const json* v = find(key);
    if (v == nullptr) {
      if (fallback) return *fallback;
      fail(key, "missing (required)");
    }
    if (!v->is_number_unsigned()) fail(key, "expected a whole number >= 0");
    const auto x = v->get<std::uint64_t>();
    if (x < lo || x > hi) fail(key, fmt::format("{} is outside {} .. {}", x, lo, hi));
    return x;
  }
  // [min, max] with lo <= min <= max <= hi; `fallback` when absent.
  std::pair<double, double> range(const std::string& key, double lo, double hi, std::pair<double, double> fallback) const {
    const json* v = find(key);
    if (v == nullptr) return fallback;
    if (!v->is_array() || v->size() != 2) fail(key, "expected [min, max]");
    const double a = checked_number((*v)[0], key + "[0]", lo, hi);
    const double b = checked_number((*v)[1], key + "[1]", lo, hi);
    if (a > b) fail(key, "min is greater than max");
    return {a, b};
  }

 private:
  const json& root_;
  std::string file_;
};

const std::set<std::string>& known_keys() {
  static const std::set<std::string> keys = {
      "name", "count", "serial_pattern", "first_number", "seed", "nominal_length_mm", "nominal_f0_hz",
      "length_spread_mm", "q", "q_spread", "resistance_ohm", "resistance_spread_ohm", "defects",
      "too_long_mm", "too_short_mm", "lossy_extra_ohm", "description"};
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
  IntermittentUnit(const AntennaParams& p, std::uint64_t key)
      : good_(make_antenna(p)), open_(make_open_feed()), key_(key) {
    on_sweep(0);
  }
  Complex gamma(double f) const override { return (is_open_ ? open_ : good_)->gamma(f); }
  std::string describe() const override {
    return fmt::format("intermittent feed (now {}): {}", is_open_ ? "open" : "good", good_->describe());
  }
  void on_sweep(std::uint64_t sweep_index) override { is_open_ = (mix(key_ ^ mix(sweep_index)) >> 63) != 0; }

 private:
  std::unique_ptr<Dut> good_;
  std::unique_ptr<Dut> open_;
  std::uint64_t key_;
  bool is_open_ = false;
};

}  // namespace

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
  for (const auto& [key, value] : root.items()) {
    if (!known_keys().contains(key)) r.fail(key, "unknown key");
  }

  Lot lot;
  lot.name = r.string("name");
  const auto count = static_cast<std::size_t>(r.unsigned_integer("count", 1, 100000));
  const std::string pattern = r.string("serial_pattern");
  const std::uint64_t first = r.unsigned_integer("first_number", 0, 1'000'000'000, 1);
  lot.seed = r.unsigned_integer("seed", 0, std::numeric_limits<std::uint64_t>::max());
  const double nominal_length = r.number("nominal_length_mm", 1e-3, 1e5);
  const double nominal_f0 = r.number("nominal_f0_hz", 1e3, 1e12);
  const double spread = r.number("length_spread_mm", 0, nominal_length / 10);
  const double q = r.number("q", 0.5, 1000);
  const double q_spread = r.number("q_spread", 0, 0.3, 0.0);
  const double resistance = r.number("resistance_ohm", 0.1, 1e4);
  const double resistance_spread = r.number("resistance_spread_ohm", 0, resistance / 4, 0.0);
  const auto too_long = r.range("too_long_mm", 0, nominal_length, {4 * spread, 6 * spread});
  const auto too_short = r.range("too_short_mm", 0, nominal_length / 2, {4 * spread, 6 * spread});
  const auto lossy = r.range("lossy_extra_ohm", 0, 1e5, {2 * resistance, 4 * resistance});

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
    // Fixed draw order per unit (length, Q, R, defect extent) whatever the defect.
    const double length_draw = rng.normal();
    const double q_draw = rng.normal();
    const double r_draw = rng.normal();
    const double defect_draw = rng.uniform();
    u.antenna.nominal_length_mm = nominal_length;
    u.antenna.nominal_f0_hz = nominal_f0;
    u.antenna.element_length_mm = nominal_length + spread * length_draw;
    u.antenna.q = std::max(0.5, q * (1.0 + q_spread * q_draw));
    u.antenna.resistance_ohm = std::max(0.1, resistance + resistance_spread * r_draw);
    if (u.defect == "too-long") {
      u.antenna.element_length_mm = nominal_length + too_long.first + (too_long.second - too_long.first) * defect_draw;
    } else if (u.defect == "too-short") {
      u.antenna.element_length_mm = nominal_length - too_short.first - (too_short.second - too_short.first) * defect_draw;
    } else if (u.defect == "lossy") {
      u.antenna.extra_series_ohm = lossy.first + (lossy.second - lossy.first) * defect_draw;
    }
    if (!(u.antenna.element_length_mm > 0)) r.fail("too_short_mm", fmt::format("unit {} would have no element left", u.serial));
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

std::unique_ptr<Dut> make_unit_dut(const SimUnit& unit, std::uint64_t seed) {
  if (unit.defect == "open-feed") return make_open_feed();
  if (unit.defect == "shorted-feed") return make_shorted_feed();
  if (unit.defect == "intermittent") return std::make_unique<IntermittentUnit>(unit.antenna, mix(seed ^ fnv1a(unit.serial)));
  return make_antenna(unit.antenna);  // good, too-long, too-short, lossy: the parameters say it all
}

double true_return_loss_db(const SimUnit& unit, double frequency_hz) {
  const std::unique_ptr<Dut> dut =
      unit.defect == "intermittent" ? make_antenna(unit.antenna) : make_unit_dut(unit, 0);
  return -20.0 * std::log10(std::abs(dut->gamma(frequency_hz)));
}

}  // namespace echoline::sim
