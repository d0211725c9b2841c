// Simulated production lots: a lot file (config/sim/lots/*.jsonc) seeds a reproducible list of
// units, each with its antenna model ("series-rlc" or "wire-monopole"), its parameters and an
// optional defect. load_lot() reads a file (throws at this edge); everything else is pure.
// A Lot is immutable and may be shared read-only.
#pragma once

#include <cstdint>
#include <filesystem>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "simulator/physics/dut_models.hpp"
#include "simulator/physics/wire_monopole.hpp"

namespace echoline::sim {

// The antenna physics of a lot: the lot file's "model" key.
enum class AntennaModel { series_rlc, wire_monopole };
std::string_view model_name(AntennaModel);  // "series-rlc" | "wire-monopole"

struct SimUnit {
  std::string serial;
  AntennaParams antenna;  // series-rlc units (all zero for wire-monopole units)
  std::string defect;     // "", "open-feed", "shorted-feed", "too-long", "too-short", "lossy", "intermittent"
  AntennaModel model = AntennaModel::series_rlc;
  WireMonopoleParams wire;  // wire-monopole units (all zero for series-rlc units)
};

// The unit's element and design lengths, whatever its model (mm).
double element_length_mm(const SimUnit&);
double nominal_length_mm(const SimUnit&);

// The unit's antenna with its length and loss, as if its feed were sound (open-feed,
// shorted-feed and intermittent units: the antenna behind the feed).
std::unique_ptr<Dut> make_unit_antenna(const SimUnit&);

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
