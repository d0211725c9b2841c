// Documents a station sends to the central database, and their content hashes.
#include "daemon/central/documents.hpp"

#include <fstream>
#include <sstream>
#include <stdexcept>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "daemon/core/sha256.hpp"
#include "daemon/store/budget_json.hpp"
#include "daemon/store/export.hpp"

namespace echoline::central {

using nlohmann::json;

namespace {
SentDocument hashed(std::string text) {
  SentDocument d;
  d.content_hash = core::sha256_hex(text);
  d.text = std::move(text);
  return d;
}
}  // namespace

SentDocument run_document(const core::RunResult& run) { return hashed(store::run_to_json(run, true).dump()); }

SentDocument calibration_document(const core::CalibrationRecord& cal) {
  json j = store::calibration_to_json(cal);
  j.erase("units_since");
  j["kit"] = {{"identity", cal.kit_identity}, {"serial", cal.kit_serial}};
  j["budget"] = json::parse(store::budget_to_json(cal.budget), nullptr, false);
  j["software"] = cal.software;
  return hashed(j.dump());
}

core::CalibrationRecord calibration_from_document(const std::string& text) {
  core::CalibrationRecord c;
  const json j = json::parse(text, nullptr, false);
  if (!j.is_object()) return c;
  auto str = [&](const char* key) { return j.contains(key) && j[key].is_string() ? j[key].get<std::string>() : std::string(); };
  auto num = [&](const char* key) { return j.contains(key) && j[key].is_number() ? j[key].get<double>() : 0.0; };
  c.id = str("id");
  c.created_utc = str("created_utc");
  c.station = str("station");
  c.software = str("software");
  c.valid = j.value("valid", false);
  c.min_directivity_db = num("min_directivity_db");
  c.noise_margin_db = num("noise_margin_db");
  if (j.contains("recipe") && j["recipe"].is_object()) {
    c.recipe.name = j["recipe"].value("name", "");
    c.recipe.version = j["recipe"].value("version", "");
    c.recipe.content_hash = j["recipe"].value("content_hash", "");
  }
  if (j.contains("kit") && j["kit"].is_object()) {
    c.kit_identity = j["kit"].value("identity", "");
    c.kit_serial = j["kit"].value("serial", "");
  }
  for (const char* key : {"warnings", "errors"}) {
    if (!j.contains(key) || !j[key].is_array()) continue;
    for (const auto& w : j[key]) {
      if (w.is_string()) (std::string_view(key) == "warnings" ? c.warnings : c.errors).push_back(w.get<std::string>());
    }
  }
  return c;
}

KitDocument kit_document(const core::CalKit& kit) {
  KitDocument k;
  k.identity = kit.identity;
  k.serial = kit.serial;
  if (kit.source.empty()) {
    k.definition = hashed(json({{"builtin", kit.identity}}).dump());
    return k;
  }
  std::ifstream in(kit.source, std::ios::binary);
  if (!in) throw std::runtime_error(fmt::format("calibration kit {}: cannot read it", kit.source));
  std::ostringstream text;
  text << in.rdbuf();
  k.definition = hashed(text.str());
  return k;
}

}  // namespace echoline::central
