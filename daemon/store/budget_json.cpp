// Budget <-> JSON (budget_json.hpp). Keys follow core::UncertaintyBudget's field names.
#include "daemon/store/budget_json.hpp"

#include <cmath>
#include <limits>
#include <stdexcept>

#include <nlohmann/json.hpp>

namespace echoline::store {

using nlohmann::json;

namespace {

// JSON has no infinity or NaN (RFC 8259 §6); a calibration that failed its checks can hold them
// (a directivity bound of infinity where the LOAD read as loud as the OPEN). They are written as
// the strings "inf", "-inf" and "nan" so the budget reads back whole; finite numbers are written
// as numbers, exactly as before, so a finite budget's text (and its hash) does not change.
json number(double v) {
  if (std::isfinite(v)) return v;
  if (std::isnan(v)) return "nan";
  return v > 0 ? "inf" : "-inf";
}

json numbers(const std::vector<double>& v) {
  json out = json::array();
  for (double x : v) out.push_back(number(x));
  return out;
}

double read_number(const json& x) {
  if (x.is_number()) return x.get<double>();
  if (x.is_null()) return std::numeric_limits<double>::quiet_NaN();   // written before the strings
  if (x.is_string()) {
    const std::string t = x.get<std::string>();
    if (t == "inf") return std::numeric_limits<double>::infinity();
    if (t == "-inf") return -std::numeric_limits<double>::infinity();
    if (t == "nan") return std::numeric_limits<double>::quiet_NaN();
  }
  throw std::invalid_argument("not a number: " + x.dump());
}

std::vector<double> read_numbers(const json& x) {
  if (!x.is_array()) throw std::invalid_argument("not an array: " + x.dump());
  std::vector<double> out;
  for (const json& v : x) out.push_back(read_number(v));
  return out;
}

}  // namespace

std::string budget_to_json(const core::UncertaintyBudget& b) {
  if (b.empty()) return "{}";
  json noise = json::array();
  for (const auto& n : b.noise) {
    noise.push_back({{"start_hz", n.start_hz}, {"stop_hz", n.stop_hz}, {"pairs", n.pairs},
                     {"high_level_db", number(n.high_level_db)}, {"load_level_db", number(n.load_level_db)},
                     {"load_level_dbm", number(n.load_level_dbm)}, {"measured", n.measured}});
  }
  json mismatch = json::array();
  for (const auto& m : b.mismatch) {
    mismatch.push_back({{"name", m.name}, {"magnitude", m.magnitude}, {"magnitude_tolerance", m.magnitude_tolerance},
                        {"phase_rad", m.phase_rad}, {"offset_delay_s", m.offset_delay_s},
                        {"phase_tolerance_rad", m.phase_tolerance_rad}});
  }
  json j = {{"coverage_factor", number(b.coverage_factor)},
            {"source_match", number(b.source_match)},
            {"connection", number(b.connection)},
            {"noise_floor_dbm", number(b.noise_floor_dbm)},
            {"error_delay_s", number(b.error_delay_s)},
            {"frequency_offset_hz", number(b.frequency_offset_hz)},
            {"kit_identity", b.kit_identity},
            {"kit_serial", b.kit_serial},
            {"noise", noise},
            {"frequency_hz", numbers(b.frequency_hz)},
            {"reference_error_low_db", numbers(b.reference_error_low_db)},
            {"reference_error_high_db", numbers(b.reference_error_high_db)},
            {"reference_noise_db", numbers(b.reference_noise_db)},
            {"directivity_bound", numbers(b.directivity_bound)},
            {"directivity_measured", numbers(b.directivity_measured)},
            {"load_residual", numbers(b.load_residual)}};
  if (b.has_directivity_vector()) {
    j["directivity_re"] = numbers(b.directivity_re);
    j["directivity_im"] = numbers(b.directivity_im);
    j["directivity_vector_bound"] = numbers(b.directivity_vector_bound);
    j["directivity_vector_systematic"] = numbers(b.directivity_vector_systematic);
    j["directivity_vector_sigma"] = numbers(b.directivity_vector_sigma);
    if (!b.directivity_bound_from_load.empty()) j["directivity_bound_from_load"] = numbers(b.directivity_bound_from_load);
  }
  if (!mismatch.empty()) j["mismatch"] = mismatch;   // absent in budgets without mismatch standards
  if (b.offset_line) {   // absent when the recipe reads each unit once
    const core::OffsetLine& l = *b.offset_line;
    j["offset_line"] = {{"delay_s", l.delay_s}, {"delay_tolerance_s", l.delay_tolerance_s}, {"loss_db", l.loss_db},
                        {"loss_tolerance_db", l.loss_tolerance_db}, {"match", l.match}};
  }
  return j.dump();
}

std::optional<core::UncertaintyBudget> budget_from_json(const std::string& text) {
  core::UncertaintyBudget b;
  if (text.empty()) return b;
  const json j = json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  if (j.empty()) return b;
  try {
    b.coverage_factor = read_number(j.at("coverage_factor"));
    b.source_match = read_number(j.at("source_match"));
    b.connection = read_number(j.at("connection"));
    b.noise_floor_dbm = read_number(j.at("noise_floor_dbm"));
    b.error_delay_s = j.value("error_delay_s", 5e-9);
    // Absent: a step sweep's budget, or a fast capture's stored before the term existed
    // (calibration_due makes that calibration due).
    b.frequency_offset_hz = j.value("frequency_offset_hz", 0.0);
    b.kit_identity = j.value("kit_identity", "");
    b.kit_serial = j.value("kit_serial", "");
    for (const auto& n : j.at("noise")) {
      core::SegmentNoise s;
      s.start_hz = n.at("start_hz").get<double>();
      s.stop_hz = n.at("stop_hz").get<double>();
      s.pairs = n.at("pairs").get<std::size_t>();
      s.high_level_db = read_number(n.at("high_level_db"));
      s.load_level_db = read_number(n.at("load_level_db"));
      s.load_level_dbm = read_number(n.at("load_level_dbm"));
      s.measured = n.at("measured").get<bool>();
      b.noise.push_back(s);
    }
    if (j.contains("mismatch")) {
      for (const auto& m : j.at("mismatch")) {
        core::MismatchStandard s;
        s.name = m.at("name").get<std::string>();
        s.magnitude = m.at("magnitude").get<double>();
        s.magnitude_tolerance = m.at("magnitude_tolerance").get<double>();
        s.phase_rad = m.at("phase_rad").get<double>();
        s.offset_delay_s = m.at("offset_delay_s").get<double>();
        s.phase_tolerance_rad = m.at("phase_tolerance_rad").get<double>();
        b.mismatch.push_back(std::move(s));
      }
    }
    if (j.contains("offset_line")) {
      const json& l = j.at("offset_line");
      core::OffsetLine line;
      line.delay_s = l.at("delay_s").get<double>();
      line.delay_tolerance_s = l.at("delay_tolerance_s").get<double>();
      line.loss_db = l.at("loss_db").get<double>();
      line.loss_tolerance_db = l.at("loss_tolerance_db").get<double>();
      line.match = l.at("match").get<double>();
      b.offset_line = line;
    }
    b.frequency_hz = read_numbers(j.at("frequency_hz"));
    b.reference_error_low_db = read_numbers(j.at("reference_error_low_db"));
    b.reference_error_high_db = read_numbers(j.at("reference_error_high_db"));
    b.reference_noise_db = read_numbers(j.at("reference_noise_db"));
    b.directivity_bound = read_numbers(j.at("directivity_bound"));
    b.directivity_measured = read_numbers(j.at("directivity_measured"));
    b.load_residual = read_numbers(j.at("load_residual"));
    if (j.contains("directivity_re")) {
      b.directivity_re = read_numbers(j.at("directivity_re"));
      b.directivity_im = read_numbers(j.at("directivity_im"));
      b.directivity_vector_bound = read_numbers(j.at("directivity_vector_bound"));
      b.directivity_vector_systematic = read_numbers(j.at("directivity_vector_systematic"));
      b.directivity_vector_sigma = read_numbers(j.at("directivity_vector_sigma"));
      // Calibrations made before the mismatches could bound |d| used the LOAD's bound alone and
      // have no copy: it stays empty, so the budget's text (and its hash) reads back unchanged.
      if (j.contains("directivity_bound_from_load")) {
        b.directivity_bound_from_load = read_numbers(j.at("directivity_bound_from_load"));
      }
    }
  } catch (const json::exception&) {
    return std::nullopt;
  } catch (const std::invalid_argument&) {
    return std::nullopt;
  }
  const std::size_t n = b.frequency_hz.size();
  if (b.reference_error_low_db.size() != n || b.reference_error_high_db.size() != n ||
      b.reference_noise_db.size() != n || b.directivity_bound.size() != n || b.directivity_measured.size() != n ||
      b.load_residual.size() != n) {
    return std::nullopt;
  }
  if (!b.directivity_re.empty() &&
      (b.directivity_re.size() != n || b.directivity_im.size() != n || b.directivity_vector_bound.size() != n ||
       b.directivity_vector_systematic.size() != n || b.directivity_vector_sigma.size() != n ||
       (!b.directivity_bound_from_load.empty() && b.directivity_bound_from_load.size() != n))) {
    return std::nullopt;
  }
  return b;
}

}  // namespace echoline::store
