// CentralReader: runs and calibrations from the central database, as the station's own types.
#include "daemon/central/reader.hpp"

#include <fmt/format.h>
#include <nlohmann/json.hpp>
#include <pqxx/pqxx>

#include "daemon/central/documents.hpp"
#include "daemon/central/schema.hpp"
#include "daemon/core/sha256.hpp"
#include "daemon/store/export.hpp"

namespace echoline::central {

CentralReader::CentralReader(CentralSettings settings, std::unique_ptr<pqxx::connection> conn)
    : settings_(std::move(settings)), conn_(std::move(conn)) {}

CentralReader::~CentralReader() = default;

Error CentralReader::failure(std::string_view doing, std::string_view what) const {
  std::string text(what);
  while (!text.empty() && (text.back() == '\n' || text.back() == ' ')) text.pop_back();
  return make_error(ErrorKind::storage, scrub(fmt::format("central database {}: {}: {}", settings_.description, doing, text),
                                              settings_.password));
}

Result<std::unique_ptr<CentralReader>> CentralReader::open(const CentralSettings& settings) {
  try {
    auto c = std::make_unique<pqxx::connection>(settings.conninfo);
    const int version = schema_version(*c);
    std::unique_ptr<CentralReader> r(new CentralReader(settings, std::move(c)));
    if (version != kCentralSchemaVersion) {
      return r->failure("checking the schema", fmt::format("it has schema version {}, this program reads version {}",
                                                           version, kCentralSchemaVersion));
    }
    return r;
  } catch (const std::exception& e) {
    return make_error(ErrorKind::storage, scrub(fmt::format("central database {}: connecting: {}", settings.description,
                                                            e.what()),
                                                settings.password));
  }
}

Result<std::vector<core::RunResult>> CentralReader::select(std::string_view where, std::string_view key,
                                                          bool with_points, std::string_view doing) {
  try {
    pqxx::read_transaction tx(*conn_);
    const pqxx::result rows = tx.exec_params(
        fmt::format("SELECT document FROM echoline.runs WHERE {} = $1 ORDER BY started_utc, station_instance, "
                    "station_seq",
                    where),
        std::string(key));
    std::vector<core::RunResult> runs;
    runs.reserve(rows.size());
    for (const auto& row : rows) {
      auto j = nlohmann::json::parse(row[0].c_str(), nullptr, false);
      auto run = store::run_from_json(j);
      if (!run) return failure(doing, run.error().message);
      if (!with_points) run->points.clear();
      runs.push_back(std::move(run.value()));
    }
    return runs;
  } catch (const std::exception& e) {
    return failure(doing, e.what());
  }
}

Result<core::RunResult> CentralReader::load_run(std::string_view run_id) {
  auto runs = select("run_id", run_id, true, fmt::format("reading run '{}'", run_id));
  if (!runs) return runs.error();
  if (runs->empty()) {
    return make_error(ErrorKind::invalid_argument, fmt::format("central database {}: no run '{}'", settings_.description, run_id));
  }
  return std::move(runs->front());
}

Result<std::vector<core::RunResult>> CentralReader::history(std::string_view serial, bool with_points) {
  return select("serial", serial, with_points, fmt::format("reading the runs of serial '{}'", serial));
}

Result<std::vector<core::RunResult>> CentralReader::lot_runs(std::string_view lot, bool with_points) {
  return select("lot", lot, with_points, fmt::format("reading the runs of lot '{}'", lot));
}

Result<std::optional<core::CalibrationRecord>> CentralReader::load_calibration(std::string_view id) {
  try {
    pqxx::read_transaction tx(*conn_);
    const pqxx::result rows = tx.exec_params("SELECT document FROM echoline.calibrations WHERE id = $1", std::string(id));
    if (rows.empty()) return std::optional<core::CalibrationRecord>{};
    return std::optional<core::CalibrationRecord>(calibration_from_document(rows[0][0].c_str()));
  } catch (const std::exception& e) {
    return failure(fmt::format("reading calibration '{}'", id), e.what());
  }
}

Result<std::optional<std::string>> CentralReader::recipe_text(std::string_view content_hash) {
  try {
    pqxx::read_transaction tx(*conn_);
    const pqxx::result rows =
        tx.exec_params("SELECT text FROM echoline.recipes WHERE content_hash = $1", std::string(content_hash));
    if (rows.empty()) return std::optional<std::string>{};
    return std::optional<std::string>(rows[0][0].c_str());
  } catch (const std::exception& e) {
    return failure(fmt::format("reading the text of recipe {}", content_hash), e.what());
  }
}

Result<std::map<std::string, std::string>> CentralReader::hashes(std::string_view station_instance, bool recompute) {
  try {
    pqxx::read_transaction tx(*conn_);
    const pqxx::result rows = tx.exec_params(
        fmt::format("SELECT run_id, {} FROM echoline.runs WHERE $1 = '' OR station_instance = $1",
                    recompute ? "document::text" : "content_hash"),
        std::string(station_instance));
    std::map<std::string, std::string> out;
    for (const auto& row : rows) out[row[0].c_str()] = recompute ? core::sha256_hex(row[1].c_str()) : row[1].c_str();
    return out;
  } catch (const std::exception& e) {
    return failure(recompute ? "reading run documents" : "reading content hashes", e.what());
  }
}

Result<std::map<std::string, std::string>> CentralReader::content_hashes(std::string_view station_instance) {
  return hashes(station_instance, false);
}

Result<std::map<std::string, std::string>> CentralReader::document_hashes(std::string_view station_instance) {
  return hashes(station_instance, true);
}

}  // namespace echoline::central
