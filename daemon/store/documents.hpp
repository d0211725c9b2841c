// The documents a client asks for, made from the store as text: exports (a run, a serial's or a
// lot's runs as CSV, JSON or Touchstone) and the HTML lot report. The daemon sends them back
// through the API and the client writes the file; offline readers make the same text.
// Thread-safe as far as the RunStore is (it serialises itself); writes no file.
#pragma once

#include <cstddef>
#include <string>
#include <string_view>

#include "daemon/core/recipe.hpp"
#include "daemon/store/lot_recipes.hpp"
#include "daemon/store/run_reader.hpp"
#include "daemon/store/run_store.hpp"
#include "drivers/result.hpp"

namespace echoline::store {

struct Document {
  std::string content;
  std::string media_type;   // "text/csv", "application/json", "text/html", "application/x-touchstone"
  std::size_t runs = 0;     // runs in it; 0 = nothing stored under the key (content empty)
};

// scope: "run" (key = run id), "serial" or "lot". format: "csv" (one row per point), "runs-csv"
// (one row per run, kRunCsvColumns), "json", "s1p" (Touchstone, scope run only).
// Errors: invalid_argument naming the bad scope, format or combination, or a run that cannot be
// a Touchstone file (a point without a calibrated return loss); storage.
Result<Document> export_document(RunReader& store, std::string_view scope, std::string_view key, std::string_view format);

// The lot report (build_lot_report) with the calibrations its runs used. Limit lines come from the
// recipe texts stored (by content hash) with the runs, read from the same store
// (resolve_lot_recipes); `local` only stands in for runs whose text is not stored, and the report
// says so. runs == 0 when the lot has no runs. Errors: storage.
Result<Document> lot_report_document(RunReader& store, std::string_view lot, const std::optional<LocalRecipe>& local,
                                     std::string_view generated_utc);

// The formats export_document takes, for messages and help: "csv, runs-csv, json or s1p".
std::string_view export_formats_text();

}  // namespace echoline::store
