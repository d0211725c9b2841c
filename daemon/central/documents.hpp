// What a station sends to the central database, as text with content hashes: a run (the
// station's JSON export form, points included), a calibration (without the counter that keeps
// changing after it is made), a kit definition. Pure; thread-safe.
#pragma once

#include <string>

#include "daemon/core/cal_kit.hpp"
#include "daemon/core/run_result.hpp"

namespace echoline::central {

struct SentDocument {
  std::string text;           // compact JSON
  std::string content_hash;   // SHA-256 hex of text
};

// The run as store::run_to_json(run, with points) gives it, compact. Two stores holding the
// same run give the same text, so the hash identifies the content.
SentDocument run_document(const core::RunResult& run);
// store::calibration_to_json plus kit, budget and software; units_since left out.
SentDocument calibration_document(const core::CalibrationRecord& cal);
// The calibration as the lot report needs it (identity, station, time, validity, directivity,
// kit, software), from a calibration document. Unknown or missing fields stay default.
core::CalibrationRecord calibration_from_document(const std::string& text);

struct KitDocument {
  std::string identity, serial;
  SentDocument definition;   // the kit file's text, or a JSON note for the built-in kit
};
// The kit file as written (the station's calibration_kit), or for the built-in kit a small JSON
// object naming it. Throws std::runtime_error when the file cannot be read.
KitDocument kit_document(const core::CalKit& kit);

}  // namespace echoline::central
