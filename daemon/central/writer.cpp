// CentralWriter: batches of runs into the central database as the station writer role.
#include "daemon/central/writer.hpp"

#include <cmath>

#include <fmt/format.h>
#include <pqxx/pqxx>

#include "daemon/central/schema.hpp"

namespace echoline::central {
namespace {

// Numbers as PostgreSQL reads them back exactly (shortest round-trip text; NaN and infinities
// by name).
std::string num(double v) {
  if (std::isnan(v)) return "NaN";
  if (std::isinf(v)) return v > 0 ? "Infinity" : "-Infinity";
  return fmt::format("{}", v);
}
std::optional<std::string> opt_num(std::optional<double> v) {
  if (!v) return std::nullopt;
  return num(*v);
}
const char* nullable(const std::optional<std::string>& v) { return v ? v->c_str() : nullptr; }

constexpr const char* kInsertRun =
    "INSERT INTO echoline.runs(run_id, station, station_instance, station_seq, serial, lot, operator, recipe_hash, "
    "calibration_id, started_utc, ended_utc, verdict, failure_class, retest, resonance_hz, depth_db, min_margin_db, "
    "points_count, software, content_hash, document) VALUES ($1,$2,$3,$4,$5,$6,$7,$8,$9,$10,$11,$12,$13,$14,$15,$16,"
    "$17,$18,$19,$20,$21) ON CONFLICT (run_id) DO NOTHING";

}  // namespace

CentralWriter::CentralWriter(CentralSettings settings, std::string station_instance, KitDocument kit)
    : settings_(std::move(settings)), instance_(std::move(station_instance)), kit_(std::move(kit)) {}

CentralWriter::~CentralWriter() = default;

Error CentralWriter::failure(ErrorKind kind, std::string_view doing, std::string_view what) const {
  std::string text(what);
  while (!text.empty() && (text.back() == '\n' || text.back() == ' ')) text.pop_back();
  return make_error(kind, scrub(fmt::format("central database {}: {}: {}", settings_.description, doing, text),
                                settings_.password));
}

bool CentralWriter::connected() const { return conn_ && conn_->is_open(); }

void CentralWriter::disconnect() { conn_.reset(); }

Status CentralWriter::connect() {
  if (connected()) return Status::success();
  conn_.reset();
  try {
    auto c = std::make_unique<pqxx::connection>(settings_.conninfo);
    const int version = schema_version(*c);
    if (version != kCentralSchemaVersion) {
      return failure(ErrorKind::storage, "checking the schema",
                     fmt::format("it has schema version {}, this station writes version {}: an administrator runs "
                                 "`echoline central migrate`",
                                 version, kCentralSchemaVersion));
    }
    c->prepare("run", kInsertRun);
    c->prepare("run_hash", "SELECT content_hash FROM echoline.runs WHERE run_id = $1");
    conn_ = std::move(c);
    return Status::success();
  } catch (const std::exception& e) {
    return failure(ErrorKind::io, "connecting", e.what());
  }
}

namespace {

// The document hash of a calibration as it was made: a calibration the check standard invalidated
// later carries valid = false and an "invalidated at ..." error, so the database may hold it as it
// was sent before that. The same calibration either way.
std::string as_made_hash(const core::CalibrationRecord& cal) {
  core::CalibrationRecord made = cal;
  std::erase_if(made.errors, [](const std::string& e) { return e.rfind("invalidated at ", 0) == 0; });
  if (made.errors.size() != cal.errors.size()) made.valid = made.errors.empty();
  return calibration_document(made).content_hash;
}

}  // namespace

Result<std::vector<SentRun>> CentralWriter::send(const std::vector<OutgoingRun>& runs) {
  if (Status s = connect(); !s.ok()) return s.error();
  std::vector<SentRun> out;
  std::set<std::string> new_recipes, new_calibrations;
  // Calibration ids the central database holds with other content: id -> (central, local) hash.
  std::map<std::string, std::pair<std::string, std::string>> other_calibrations;
  try {
    pqxx::work tx(*conn_);
    if (!kit_sent_) {
      tx.exec_params0("INSERT INTO echoline.kits(content_hash, identity, serial, definition) VALUES ($1,$2,$3,$4) "
                      "ON CONFLICT (content_hash) DO NOTHING",
                      kit_.definition.content_hash, kit_.identity, kit_.serial, kit_.definition.text);
    }
    for (const auto& o : runs) {
      if (o.recipe && !sent_recipes_.count(o.recipe->content_hash) && !new_recipes.count(o.recipe->content_hash)) {
        tx.exec_params0("INSERT INTO echoline.recipes(content_hash, name, version, text) VALUES ($1,$2,$3,$4) "
                        "ON CONFLICT (content_hash) DO NOTHING",
                        o.recipe->content_hash, o.recipe->name, o.recipe->version, o.recipe->text);
        new_recipes.insert(o.recipe->content_hash);
      }
      if (o.calibration && !sent_calibrations_.count(o.calibration->id) && !new_calibrations.count(o.calibration->id) &&
          !other_calibrations.count(o.calibration->id)) {
        const SentDocument doc = calibration_document(*o.calibration);
        // The kit named by the calibration is the station's configured kit when identity and
        // serial match; otherwise the central database does not know which definition it was.
        const bool same_kit = o.calibration->kit_identity == kit_.identity && o.calibration->kit_serial == kit_.serial;
        const std::optional<std::string> kit_hash =
            same_kit ? std::optional<std::string>(kit_.definition.content_hash) : std::nullopt;
        pqxx::result ins = tx.exec_params(
            "INSERT INTO echoline.calibrations(id, station, station_instance, created_utc, kit_hash, "
            "content_hash, document) VALUES ($1,$2,$3,$4,$5,$6,$7) ON CONFLICT (id) DO NOTHING",
            o.calibration->id, o.calibration->station, instance_, o.calibration->created_utc, nullable(kit_hash),
            doc.content_hash, doc.text);
        // Already there: the same calibration (same hash), or another one under the same id (a
        // second station with this name, a store started over). A run must never point at a
        // calibration that did not judge it, so such runs are not stored.
        std::string have = doc.content_hash;
        if (ins.affected_rows() == 0) {
          have = tx.exec_params1("SELECT content_hash FROM echoline.calibrations WHERE id = $1", o.calibration->id)[0]
                     .as<std::string>();
        }
        if (have == doc.content_hash || have == as_made_hash(*o.calibration)) new_calibrations.insert(o.calibration->id);
        else other_calibrations[o.calibration->id] = {have, doc.content_hash};
      }
      const auto& r = o.run;
      if (auto other = other_calibrations.find(r.calibration_id); other != other_calibrations.end()) {
        out.push_back(SentRun{r.run_id, SendResult::different_calibration, other->second.first, other->second.second});
        continue;
      }
      const auto& m = r.metrics;
      const std::optional<std::string> resonance = opt_num(m.resonance_hz);
      pqxx::result res = tx.exec_prepared(
          "run", r.run_id, r.station, instance_, o.station_seq, r.serial, r.lot, r.operator_name, r.recipe.content_hash,
          r.calibration_id, r.started_utc, r.ended_utc, std::string(core::to_string(r.verdict)),
          std::string(core::to_string(r.failure_class)), r.retest, nullable(resonance), num(m.depth_db),
          num(m.min_margin_db), static_cast<long long>(r.points.size()), r.software, o.document.content_hash,
          o.document.text);
      SentRun sent{r.run_id, SendResult::stored, o.document.content_hash};
      if (res.affected_rows() == 0) {
        pqxx::row have = tx.exec_prepared1("run_hash", r.run_id);
        sent.central_hash = have[0].as<std::string>();
        sent.result = sent.central_hash == o.document.content_hash ? SendResult::already_there
                                                                   : SendResult::different_content;
      }
      out.push_back(std::move(sent));
    }
    tx.commit();
  } catch (const std::exception& e) {
    conn_.reset();
    return failure(ErrorKind::io, fmt::format("sending {} run{}", runs.size(), runs.size() == 1 ? "" : "s"), e.what());
  }
  kit_sent_ = true;
  sent_recipes_.insert(new_recipes.begin(), new_recipes.end());
  sent_calibrations_.insert(new_calibrations.begin(), new_calibrations.end());
  return out;
}

}  // namespace echoline::central
