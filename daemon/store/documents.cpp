// Exports and the lot report as text from the store; the same code serves the API and offline reading.
#include "daemon/store/documents.hpp"

#include <cmath>
#include <map>
#include <optional>
#include <set>
#include <vector>

#include <fmt/format.h>

#include "daemon/store/export.hpp"
#include "daemon/store/lot_report.hpp"

namespace echoline::store {

std::string_view export_formats_text() { return "csv, runs-csv, json or s1p"; }

namespace {
// Touchstone needs a value at every frequency: a run with a point not judged (aborted) has none.
Status check_touchstone(const core::RunResult& run) {
  if (run.points.empty()) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("export: run '{}' has no points: nothing for a Touchstone file ({}: {})", run.run_id,
                                  core::to_string(run.verdict), run.reason));
  }
  for (std::size_t i = 0; i < run.points.size(); ++i) {
    if (!std::isfinite(run.points[i].return_loss_db)) {
      return make_error(ErrorKind::invalid_argument,
                        fmt::format("export: run '{}' has no calibrated return loss at point {} ({} Hz), so it "
                                    "cannot be a Touchstone file ({}: {}); export it as csv or json",
                                    run.run_id, i + 1, run.points[i].frequency_hz, core::to_string(run.verdict),
                                    run.reason));
    }
  }
  return Status::success();
}
}  // namespace

Result<Document> export_document(RunReader& store, std::string_view scope, std::string_view key, std::string_view format) {
  if (format != "csv" && format != "runs-csv" && format != "json" && format != "s1p") {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("export: format must be {}, not \"{}\"", export_formats_text(), format));
  }
  std::vector<core::RunResult> runs;
  if (scope == "run") {
    auto found = store.load_run(key);
    if (!found) {
      if (found.error().kind == ErrorKind::invalid_argument) return Document{};   // no such run
      return found.error();
    }
    runs.push_back(std::move(found.value()));
  } else if (scope == "serial" || scope == "lot") {
    auto found = scope == "serial" ? store.history(key, true) : store.lot_runs(key, true);
    if (!found) return found.error();
    runs = std::move(found.value());
  } else {
    return make_error(ErrorKind::invalid_argument, fmt::format("export: scope must be run, serial or lot, not \"{}\"", scope));
  }
  if (format == "s1p" && scope != "run") {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("export: format s1p holds one run: use scope run (a run id), not {} \"{}\"", scope, key));
  }
  Document doc;
  doc.runs = runs.size();
  if (runs.empty()) return doc;
  if (format == "csv" || format == "runs-csv") {
    doc.content = format == "csv" ? csv_points(runs) : csv_runs(runs);
    doc.media_type = "text/csv";
    return doc;
  }
  if (format == "s1p") {
    if (Status s = check_touchstone(runs.front()); !s.ok()) return s.error();
    doc.content = touchstone_s1p(runs.front());
    doc.media_type = "application/x-touchstone";
    return doc;
  }
  doc.media_type = "application/json";
  doc.content = scope == "run" ? json_run(runs.front()) : scope == "serial" ? json_serial(key, runs) : json_lot(key, runs);
  return doc;
}

Result<Document> lot_report_document(RunReader& store, std::string_view lot, const std::optional<LocalRecipe>& local,
                                     std::string_view generated_utc) {
  auto runs = store.lot_runs(lot, true);
  if (!runs) return runs.error();
  Document doc;
  doc.runs = runs->size();
  if (runs->empty()) return doc;
  std::vector<core::CalibrationRecord> cals;
  std::set<std::string> ids;
  for (const auto& r : *runs) {
    if (r.calibration_id.empty() || !ids.insert(r.calibration_id).second) continue;
    auto c = store.load_calibration(r.calibration_id);
    if (!c) return c.error();
    if (c->has_value()) cals.push_back(c->value());
  }
  std::map<std::string, std::optional<std::string>> texts;
  for (const auto& r : *runs) {
    if (r.recipe.content_hash.empty() || texts.count(r.recipe.content_hash)) continue;
    auto t = store.recipe_text(r.recipe.content_hash);
    if (!t) return t.error();
    texts.emplace(r.recipe.content_hash, std::move(t.value()));
  }
  LotReportOptions opts;
  opts.generated_utc = std::string(generated_utc);
  opts.recipes = resolve_lot_recipes(*runs, texts, local);
  const core::Limits limits = opts.recipes->drawn.value_or(core::Limits{});
  doc.content = build_lot_report(lot, *runs, cals, limits, opts);
  doc.media_type = "text/html";
  return doc;
}

}  // namespace echoline::store
