// Shared pieces of the simulated instruments: config reading and seeded noise.
#include "simulator/instrument.hpp"

#include <cmath>
#include <cstring>
#include <stdexcept>

#include <nlohmann/json.hpp>

namespace echoline::sim::detail {
namespace {

[[noreturn]] void bad(const char* key, const std::string& what) {
  throw std::invalid_argument(std::string("instrument settings: \"") + key + "\": " + what);
}

std::uint64_t splitmix64(std::uint64_t x) {
  x += 0x9E3779B97F4A7C15ull;
  x = (x ^ (x >> 30)) * 0xBF58476D1CE4E5B9ull;
  x = (x ^ (x >> 27)) * 0x94D049BB133111EBull;
  return x ^ (x >> 31);
}

std::uint64_t bits_of(double v) {
  std::uint64_t u = 0;
  std::memcpy(&u, &v, sizeof u);
  return u;
}

}  // namespace

double config_number(const nlohmann::json& config, const char* key, double fallback) {
  if (!config.is_object() || !config.contains(key)) return fallback;
  const auto& v = config.at(key);
  if (!v.is_number()) bad(key, "must be a number, got " + v.dump());
  const double d = v.get<double>();
  if (!std::isfinite(d)) bad(key, "must be finite");
  return d;
}

std::pair<double, double> config_range(const nlohmann::json& config, const char* key, std::pair<double, double> fallback) {
  if (!config.is_object() || !config.contains(key)) return fallback;
  const auto& v = config.at(key);
  if (!v.is_array() || v.size() != 2 || !v[0].is_number() || !v[1].is_number()) bad(key, "must be [low, high], got " + v.dump());
  const double lo = v[0].get<double>();
  const double hi = v[1].get<double>();
  if (!(lo < hi)) bad(key, "low must be below high, got " + v.dump());
  return {lo, hi};
}

std::uint64_t config_seed(const nlohmann::json& config, std::uint64_t fallback) {
  if (!config.is_object() || !config.contains("seed")) return fallback;
  const auto& v = config.at("seed");
  if (!v.is_number_integer() && !v.is_number_unsigned()) bad("seed", "must be an integer, got " + v.dump());
  return v.get<std::uint64_t>();
}

std::string config_identity(const nlohmann::json& config, const std::string& fallback) {
  std::string id = fallback;
  if (config.is_object() && config.contains("identity")) {
    const auto& v = config.at("identity");
    if (!v.is_string()) bad("identity", "must be a string, got " + v.dump());
    id = v.get<std::string>();
  }
  int commas = 0;
  for (char c : id) {
    if (c == ',') ++commas;
    if (c < 0x20 || c > 0x7E || c == ';') bad("identity", "characters must be ASCII 0x20-0x7E without ';' (IEEE 488.2 *IDN?)");
  }
  if (commas != 3) bad("identity", "needs four comma-separated fields (manufacturer,model,serial,firmware), got '" + id + "'");
  if (id.size() > 72) bad("identity", "longer than 72 characters (IEEE 488.2 *IDN?)");
  return id;
}

double hashed_normal(std::uint64_t seed, double a, double b) {
  const std::uint64_t h1 = splitmix64(seed ^ splitmix64(bits_of(a) ^ splitmix64(bits_of(b))));
  const std::uint64_t h2 = splitmix64(h1);
  const double u1 = (static_cast<double>(h1 >> 11) + 0.5) / 9007199254740992.0;  // (0,1)
  const double u2 = (static_cast<double>(h2 >> 11) + 0.5) / 9007199254740992.0;
  return std::sqrt(-2.0 * std::log(u1)) * std::cos(2.0 * 3.14159265358979323846 * u2);
}

}  // namespace echoline::sim::detail
