// Budget <-> JSON (budget_json.hpp). Keys follow core::UncertaintyBudget's field names.
#include "daemon/store/budget_json.hpp"

#include <nlohmann/json.hpp>

namespace echoline::store {

using nlohmann::json;

std::string budget_to_json(const core::UncertaintyBudget& b) {
  if (b.empty()) return "{}";
  json noise = json::array();
  for (const auto& n : b.noise) {
    noise.push_back({{"start_hz", n.start_hz}, {"stop_hz", n.stop_hz}, {"pairs", n.pairs},
                     {"high_level_db", n.high_level_db}, {"load_level_db", n.load_level_db},
                     {"load_level_dbm", n.load_level_dbm}, {"measured", n.measured}});
  }
  json mismatch = json::array();
  for (const auto& m : b.mismatch) {
    mismatch.push_back({{"name", m.name}, {"magnitude", m.magnitude}, {"magnitude_tolerance", m.magnitude_tolerance},
                        {"phase_rad", m.phase_rad}, {"offset_delay_s", m.offset_delay_s},
                        {"phase_tolerance_rad", m.phase_tolerance_rad}});
  }
  json j = {{"coverage_factor", b.coverage_factor},
            {"source_match", b.source_match},
            {"connection", b.connection},
            {"noise_floor_dbm", b.noise_floor_dbm},
            {"error_delay_s", b.error_delay_s},
            {"frequency_offset_hz", b.frequency_offset_hz},
            {"kit_identity", b.kit_identity},
            {"kit_serial", b.kit_serial},
            {"noise", noise},
            {"frequency_hz", b.frequency_hz},
            {"reference_error_low_db", b.reference_error_low_db},
            {"reference_error_high_db", b.reference_error_high_db},
            {"reference_noise_db", b.reference_noise_db},
            {"directivity_bound", b.directivity_bound},
            {"directivity_measured", b.directivity_measured},
            {"load_residual", b.load_residual}};
  if (b.has_directivity_vector()) {
    j["directivity_re"] = b.directivity_re;
    j["directivity_im"] = b.directivity_im;
    j["directivity_vector_bound"] = b.directivity_vector_bound;
    j["directivity_vector_systematic"] = b.directivity_vector_systematic;
    j["directivity_vector_sigma"] = b.directivity_vector_sigma;
    if (!b.directivity_bound_from_load.empty()) j["directivity_bound_from_load"] = b.directivity_bound_from_load;
  }
  if (!mismatch.empty()) j["mismatch"] = mismatch;   // absent in budgets without mismatch standards
  return j.dump();
}

std::optional<core::UncertaintyBudget> budget_from_json(const std::string& text) {
  core::UncertaintyBudget b;
  if (text.empty()) return b;
  const json j = json::parse(text, nullptr, false);
  if (j.is_discarded() || !j.is_object()) return std::nullopt;
  if (j.empty()) return b;
  try {
    b.coverage_factor = j.at("coverage_factor").get<double>();
    b.source_match = j.at("source_match").get<double>();
    b.connection = j.at("connection").get<double>();
    b.noise_floor_dbm = j.at("noise_floor_dbm").get<double>();
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
      s.high_level_db = n.at("high_level_db").get<double>();
      s.load_level_db = n.at("load_level_db").get<double>();
      s.load_level_dbm = n.at("load_level_dbm").get<double>();
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
    b.frequency_hz = j.at("frequency_hz").get<std::vector<double>>();
    b.reference_error_low_db = j.at("reference_error_low_db").get<std::vector<double>>();
    b.reference_error_high_db = j.at("reference_error_high_db").get<std::vector<double>>();
    b.reference_noise_db = j.at("reference_noise_db").get<std::vector<double>>();
    b.directivity_bound = j.at("directivity_bound").get<std::vector<double>>();
    b.directivity_measured = j.at("directivity_measured").get<std::vector<double>>();
    b.load_residual = j.at("load_residual").get<std::vector<double>>();
    if (j.contains("directivity_re")) {
      b.directivity_re = j.at("directivity_re").get<std::vector<double>>();
      b.directivity_im = j.at("directivity_im").get<std::vector<double>>();
      b.directivity_vector_bound = j.at("directivity_vector_bound").get<std::vector<double>>();
      b.directivity_vector_systematic = j.at("directivity_vector_systematic").get<std::vector<double>>();
      b.directivity_vector_sigma = j.at("directivity_vector_sigma").get<std::vector<double>>();
      // Calibrations made before the mismatches could bound |d| used the LOAD's bound alone and
      // have no copy: it stays empty, so the budget's text (and its hash) reads back unchanged.
      if (j.contains("directivity_bound_from_load")) {
        b.directivity_bound_from_load = j.at("directivity_bound_from_load").get<std::vector<double>>();
      }
    }
  } catch (const json::exception&) {
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
