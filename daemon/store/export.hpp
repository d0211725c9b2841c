// Exports of stored runs: CSV (RFC 4180), JSON and Touchstone 1-port text, as pure functions
// returning strings, plus one writer that puts a string in a file atomically.
// Pure and thread-safe except write_text_file (file I/O).
#pragma once

#include <filesystem>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json_fwd.hpp>

#include "daemon/core/run_result.hpp"
#include "drivers/result.hpp"

namespace echoline::store {

// Numbers: shortest text that reads back to the same double ("{}" in fmt, locale-independent).
// +inf (an unbounded best-case return loss) is written "inf" in CSV and null in JSON.

// One row per point: run_id,serial,lot,recipe,verdict,frequency_hz,raw_dbm,return_loss_db,
// return_loss_worst_db,return_loss_best_db. Header line first; CRLF line ends (RFC 4180 §2).
std::string csv_points(const std::vector<core::RunResult>& runs);

// One row per run (no points): identity, recipe, rule, times, verdict, class, reason, metrics,
// trim, timings, points count. Column names in kRunCsvColumns order.
std::string csv_runs(const std::vector<core::RunResult>& runs);
extern const std::vector<std::string> kRunCsvColumns;

// RFC 4180 parse (quoted fields, doubled quotes, CRLF or LF). Errors name line and column.
Result<std::vector<std::vector<std::string>>> parse_csv(std::string_view text);
// Quotes a field when it holds ',', '"', CR or LF (RFC 4180 §2.6, §2.7).
std::string csv_field(std::string_view value);

// JSON of one run (points included when with_points) and its inverse.
nlohmann::json run_to_json(const core::RunResult& run, bool with_points = true);
Result<core::RunResult> run_from_json(const nlohmann::json& j);
nlohmann::json calibration_to_json(const core::CalibrationRecord& cal);

// Documents: {"format":"echoline-runs","version":1,"kind":"run"|"serial"|"lot","key":...,"runs":[...]}
std::string json_run(const core::RunResult& run);
std::string json_serial(std::string_view serial, const std::vector<core::RunResult>& runs);
std::string json_lot(std::string_view lot, const std::vector<core::RunResult>& runs);

// Touchstone v1 one-port file, "# HZ S DB R 50", S11 dB = -return loss. A scalar measurement has
// no phase: comment lines say so and the angle column is written as 0. The '!' header names the
// run, serial, lot, recipe, verdict, calibration, station and software, and says where the bounds
// are. REQUIRES a finite return loss at every point (export_document checks it).
std::string touchstone_s1p(const core::RunResult& run);

// Writes content to `file` via a temporary file in the same folder, fsync, rename.
// Errors: ErrorKind::io naming the file.
Status write_text_file(const std::filesystem::path& file, std::string_view content);

}  // namespace echoline::store
