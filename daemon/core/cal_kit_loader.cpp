// Calibration-kit files (cal_kit_loader.hpp). Keys and units are documented in config/README.md
// and in the shipped kits under config/kits/.
#include "daemon/core/cal_kit_loader.hpp"

#include <cmath>
#include <fstream>
#include <iterator>
#include <numbers>
#include <algorithm>
#include <set>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"
#include "drivers/config_error.hpp"
#include "drivers/jsonc.hpp"

namespace echoline::core {
namespace {

using drivers::JsoncDocument;
using drivers::JsonPointer;

constexpr double kDegree = std::numbers::pi / 180;

double frequency(const JsoncDocument& doc, const JsonPointer& at) {
  const auto& v = doc.at(at);
  double hz = 0;
  if (v.is_number()) {
    hz = v.get<double>();
  } else if (v.is_string()) {
    auto parsed = parse_frequency(v.get<std::string>());
    if (!parsed) doc.fail(at, parsed.error().message);
    hz = *parsed;
  } else {
    doc.fail(at, "expected a frequency (a number in Hz or a string such as \"3 GHz\")");
  }
  if (!(hz > 0) || hz > 1e12) doc.fail(at, fmt::format("frequency {} Hz is out of range (above 0, at most 1 THz)", hz));
  return hz;
}

ReflectStandard reflect(const JsoncDocument& doc, const JsonPointer& at, bool open) {
  doc.require_object(at);
  if (open) {
    doc.check_keys(at, {"min_magnitude", "fringe_capacitance_ff", "offset_delay_ps", "phase_tolerance_deg"});
  } else {
    doc.check_keys(at, {"min_magnitude", "inductance_ph", "offset_delay_ps", "phase_tolerance_deg"});
  }
  ReflectStandard s;
  s.min_magnitude = doc.number_in(at / "min_magnitude", 1.0, 0.5, 1.0, "");
  if (open) s.fringe_capacitance_f = doc.number_in(at / "fringe_capacitance_ff", 0, 0, 1000, "fF") * 1e-15;
  else s.inductance_h = doc.number_in(at / "inductance_ph", 0, 0, 10000, "pH") * 1e-12;
  s.offset_delay_s = doc.number_in(at / "offset_delay_ps", 0, 0, 1e5, "ps") * 1e-12;
  s.phase_tolerance_rad = doc.number_in(at / "phase_tolerance_deg", 0, 0, 45, "degrees") * kDegree;
  return s;
}

// "mismatch": [{name, magnitude, magnitude_tolerance, phase_deg, offset_delay_ps,
// phase_tolerance_deg}, ...]: names unique, spelled as the operator and the traces see them.
std::vector<MismatchStandard> mismatch_list(const JsoncDocument& doc, const JsonPointer& at) {
  std::vector<MismatchStandard> out;
  if (!doc.has(at)) return out;
  const auto& list = doc.require_array(at);
  std::set<std::string> seen;
  for (std::size_t i = 0; i < list.size(); ++i) {
    const JsonPointer m = at / i;
    doc.require_object(m);
    doc.check_keys(m, {"name", "magnitude", "magnitude_tolerance", "phase_deg", "offset_delay_ps", "phase_tolerance_deg"});
    MismatchStandard s;
    s.name = doc.require_string(m / "name");
    const bool spelled = !s.name.empty() && std::all_of(s.name.begin(), s.name.end(), [](char c) {
      return (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') || c == '-';
    });
    if (!spelled) {
      doc.fail(m / "name", fmt::format("\"{}\": a standard's name is capital letters, digits and '-' (e.g. MISMATCH-A)", s.name));
    }
    if (s.name == "OPEN" || s.name == "SHORT" || s.name == "LOAD" || s.name == "DUT") {
      doc.fail(m / "name", fmt::format("\"{}\" is already the name of another standard or the DUT position", s.name));
    }
    if (!seen.insert(s.name).second) doc.fail(m / "name", fmt::format("\"{}\" is named twice in the kit", s.name));
    s.magnitude = doc.require_number(m / "magnitude", "");
    if (!(s.magnitude > 0 && s.magnitude <= 0.5)) {
      doc.fail(m / "magnitude", fmt::format("{}: |Γ| of a mismatch standard must be above 0 and at most 0.5", s.magnitude));
    }
    s.magnitude_tolerance = doc.number_in(m / "magnitude_tolerance", 0, 0, 0.5, "");
    s.phase_rad = doc.number_in(m / "phase_deg", 0, -180, 180, "degrees") * kDegree;
    s.offset_delay_s = doc.number_in(m / "offset_delay_ps", 0, 0, 1e5, "ps") * 1e-12;
    s.phase_tolerance_rad = doc.number_in(m / "phase_tolerance_deg", 0, 0, 45, "degrees") * kDegree;
    out.push_back(std::move(s));
  }
  return out;
}

// "offset_line": {delay_ps, delay_tolerance_ps, loss_db, loss_tolerance_db, match_return_loss_db}:
// the line of the offset pair. Every key is required: a line whose delay, loss or match the kit
// does not state cannot bound a second reading.
OffsetLine offset_line(const JsoncDocument& doc, const JsonPointer& at) {
  doc.require_object(at);
  const std::vector<std::string> keys = {"delay_ps", "delay_tolerance_ps", "loss_db", "loss_tolerance_db",
                                         "match_return_loss_db"};
  doc.check_keys(at, keys);
  for (const std::string& key : keys) {
    if (!doc.has(at / key)) doc.fail(at / key, "is required (the offset line's data sheet or measurement states it)");
  }
  OffsetLine line;
  line.delay_s = doc.number_in(at / "delay_ps", 0, 1, 1e5, "ps") * 1e-12;
  line.delay_tolerance_s = doc.number_in(at / "delay_tolerance_ps", 0, 0, 1e4, "ps") * 1e-12;
  line.loss_db = doc.number_in(at / "loss_db", 0, 0, 3, "dB");
  line.loss_tolerance_db = doc.number_in(at / "loss_tolerance_db", 0, 0, 3, "dB");
  const double match_db = doc.number_in(at / "match_return_loss_db", 0, 10, 80, "dB");
  line.match = std::pow(10.0, -match_db / 20);
  return line;
}

}  // namespace

CalKit parse_cal_kit(std::string text, std::string file_name) {
  const JsoncDocument doc = JsoncDocument::parse(std::move(text), file_name);
  const JsonPointer root("");
  doc.require_object(root);
  doc.check_keys(root, {"identity", "serial", "description", "open", "short", "load", "connection_repeatability_db",
                        "mismatch", "offset_line"});
  CalKit k;
  k.source = file_name;
  k.identity = doc.require_string(JsonPointer("/identity"));
  if (k.identity.empty()) doc.fail(JsonPointer("/identity"), "must not be empty");
  k.serial = doc.require_string(JsonPointer("/serial"));
  if (k.serial.empty()) doc.fail(JsonPointer("/serial"), "must not be empty (write the serial on the kit's case)");
  k.open = reflect(doc, JsonPointer("/open"), true);
  k.short_ = reflect(doc, JsonPointer("/short"), false);
  const JsonPointer load("/load");
  doc.require_object(load);
  doc.check_keys(load, {"worst_return_loss"});
  const auto& steps = doc.require_array(load / "worst_return_loss");
  if (steps.empty()) doc.fail(load / "worst_return_loss", "needs at least one {up_to_hz, return_loss_db} step");
  for (std::size_t i = 0; i < steps.size(); ++i) {
    const JsonPointer at = load / "worst_return_loss" / i;
    doc.require_object(at);
    doc.check_keys(at, {"up_to_hz", "return_loss_db"});
    LoadStep s;
    s.up_to_hz = frequency(doc, at / "up_to_hz");
    s.min_return_loss_db = doc.require_number(at / "return_loss_db", "dB");
    if (!(s.min_return_loss_db >= 6 && s.min_return_loss_db <= 80)) {
      doc.fail(at / "return_loss_db", fmt::format("{} dB is out of range (6 to 80 dB)", s.min_return_loss_db));
    }
    if (!k.load.empty() && s.up_to_hz <= k.load.back().up_to_hz) {
      doc.fail(at / "up_to_hz", "steps must be in ascending frequency");
    }
    k.load.push_back(s);
  }
  // Connection repeatability as the return loss of the reflection a reconnection may add
  // (standard uncertainty); 0 / absent = not known, which the budget then leaves out.
  const double rep_db = doc.number_in(JsonPointer("/connection_repeatability_db"), 0, 0, 100, "dB");
  k.connection_repeatability = rep_db > 0 ? std::pow(10.0, -rep_db / 20) : 0;
  k.mismatch = mismatch_list(doc, JsonPointer("/mismatch"));
  if (doc.has(JsonPointer("/offset_line"))) k.offset_line = offset_line(doc, JsonPointer("/offset_line"));
  return k;
}

CalKit load_cal_kit(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw drivers::ConfigError(file.string(), 0, "", "cannot open the calibration-kit file for reading");
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  return parse_cal_kit(std::move(bytes), file.string());
}

}  // namespace echoline::core
