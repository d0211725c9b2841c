// What lot.cpp needs to turn a lot file into units: a portable seeded generator (SplitMix64)
// and a reader of typed keys whose every failure names the file and the key.
// Internal to the lot loader; header-only, no state beyond each object's own.
#pragma once

#include <cmath>
#include <cstdint>
#include <numbers>
#include <optional>
#include <stdexcept>
#include <string>
#include <string_view>
#include <utility>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

namespace echoline::sim::lot_file {

using nlohmann::json;

// SplitMix64 (Steele, Lea & Flood 2014): a portable generator, so the same seed gives the same
// units with any standard library (std:: distributions are implementation-defined).
inline std::uint64_t splitmix64(std::uint64_t& state) {
  std::uint64_t z = (state += 0x9E3779B97F4A7C15ull);
  z = (z ^ (z >> 30)) * 0xBF58476D1CE4E5B9ull;
  z = (z ^ (z >> 27)) * 0x94D049BB133111EBull;
  return z ^ (z >> 31);
}

inline std::uint64_t mix(std::uint64_t value) { return splitmix64(value); }

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

// FNV-1a, 64 bit: a stable hash of a serial.
inline std::uint64_t fnv1a(std::string_view text) {
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

}  // namespace echoline::sim::lot_file
