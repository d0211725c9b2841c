// Simulated production lots: a lot file (config/sim/lots/*.jsonc) seeds a reproducible list of
// units, each with its antenna parameters and an optional defect. load_lot() reads a file
// (throws at this edge); everything else is pure. A Lot is immutable and may be shared read-only.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {

struct SimUnit {
  std::string serial;
  AntennaParams antenna;
  std::string defect;  // "", "open-feed", "shorted-feed", "too-long", "too-short", "lossy", "intermittent"
};

struct Lot {
  std::string name;
  std::uint64_t seed;
  std::vector<SimUnit> units;
  // The unit with this serial, or nullptr. The pointer lives as long as the Lot.
  const SimUnit* find(std::string_view serial) const;
};

// Reads a lot file; same file (same seed) -> the same units, in the same order.
// Throws std::runtime_error "<file>: <key>: <message>" on a bad file.
Lot load_lot(const std::filesystem::path&);
// The same from text; `file_name` only names the source in error messages.
Lot parse_lot(std::string_view text, const std::string& file_name);

// The simulated DUT for a unit. Intermittent units change between sweeps (Dut::on_sweep),
// as a function of `seed` and the sweep index only.
std::unique_ptr<Dut> make_unit_dut(const SimUnit&, std::uint64_t seed);

// The DUT's own return loss in dB (no bench errors); for an intermittent unit, its good state.
double true_return_loss_db(const SimUnit&, double frequency_hz);

}  // namespace echoline::sim
