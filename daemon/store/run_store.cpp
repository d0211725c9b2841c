// RunStore: SQLite access for runs, units and calibrations. Every write is one transaction;
// every value is bound as a parameter; an internal mutex serialises callers.
#include "daemon/store/run_store.hpp"

#include <fmt/format.h>

#include <chrono>
#include <cmath>
#include <limits>
#include <mutex>
#include <nlohmann/json.hpp>

#include "daemon/store/budget_json.hpp"
#include "daemon/store/run_store_impl.hpp"
#include "daemon/store/schema.hpp"
#include "daemon/store/sqlite_db.hpp"
#include "daemon/store/yield.hpp"

namespace echoline::store {

using detail::Database;
using detail::Statement;

namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

constexpr std::string_view kRunColumns =
    "run_id, serial, lot, recipe_name, recipe_version, recipe_hash, decision_rule, station, operator, "
    "instruments_json, started_utc, ended_utc, temperature_c, calibration_id, retest, verdict, failure_class, "
    "reason, resonance_hz, depth_db, bandwidth_hz, band_low_hz, band_high_hz, min_margin_db, vswr_at_resonance, "
    "mismatch_loss_db, directivity_db, trim_element_length_mm, trim_change_mm, trim_measured_hz, trim_target_hz, "
    "trim_text, total_s, sweep_s, analysis_s, points_count, resonance_low_hz, resonance_high_hz, software, "
    "resonance_interval";

const char* yield_column(YieldGroup group) {
  return group == YieldGroup::lot ? "lot" : group == YieldGroup::recipe ? "recipe_name" : "station";
}

core::Verdict verdict_from(std::string_view s) {
  if (s == "pass") return core::Verdict::pass;
  if (s == "fail") return core::Verdict::fail;
  if (s == "inconclusive") return core::Verdict::inconclusive;
  return core::Verdict::aborted;
}

core::FailureClass class_from(std::string_view s) {
  using core::FailureClass;
  for (auto c : {FailureClass::no_response, FailureClass::tuned_low, FailureClass::tuned_high, FailureClass::shallow,
                 FailureClass::out_of_mask}) {
    if (s == core::to_string(c)) return c;
  }
  return FailureClass::none;
}

std::string map_json(const std::map<std::string, std::string>& m) { return nlohmann::json(m).dump(); }

std::map<std::string, std::string> map_from_json(const std::string& text) {
  auto j = nlohmann::json::parse(text, nullptr, false);
  std::map<std::string, std::string> out;
  if (j.is_object()) {
    for (auto& [k, v] : j.items()) out[k] = v.is_string() ? v.get<std::string>() : v.dump();
  }
  return out;
}

// Arrays of doubles as JSON text; non-finite values become null (and NaN on the way back).
std::string doubles_json(const std::vector<double>& v) {
  nlohmann::json j = nlohmann::json::array();
  for (double x : v) j.push_back(std::isfinite(x) ? nlohmann::json(x) : nlohmann::json(nullptr));
  return j.dump();
}
std::vector<double> doubles_from_json(const std::string& text) {
  std::vector<double> out;
  auto j = nlohmann::json::parse(text, nullptr, false);
  if (!j.is_array()) return out;
  for (auto& x : j) out.push_back(x.is_number() ? x.get<double>() : std::numeric_limits<double>::quiet_NaN());
  return out;
}

core::RunResult run_from_row(const Statement& s) {
  core::RunResult r;
  int c = 0;
  r.run_id = s.text(c++);
  r.serial = s.text(c++);
  r.lot = s.text(c++);
  r.recipe.name = s.text(c++);
  r.recipe.version = s.text(c++);
  r.recipe.content_hash = s.text(c++);
  r.decision_rule = s.text(c++);
  r.station = s.text(c++);
  r.operator_name = s.text(c++);
  r.instruments = map_from_json(s.text(c++));
  r.started_utc = s.text(c++);
  r.ended_utc = s.text(c++);
  r.temperature_c = s.optional_real(c++);
  r.calibration_id = s.text(c++);
  r.retest = s.integer(c++) != 0;
  r.verdict = verdict_from(s.text(c++));
  r.failure_class = class_from(s.text(c++));
  r.reason = s.text(c++);
  auto& m = r.metrics;
  m.resonance_hz = s.optional_real(c++);
  m.depth_db = s.real(c++);
  m.bandwidth_hz = s.optional_real(c++);
  m.band_low_hz = s.optional_real(c++);
  m.band_high_hz = s.optional_real(c++);
  m.min_margin_db = s.real(c++);
  m.vswr_at_resonance = s.real(c++);
  m.mismatch_loss_db = s.real(c++);
  m.directivity_db = s.real(c++);
  if (!s.is_null(c)) {
    core::TrimAdvice t;
    t.element_length_mm = s.real(c);
    t.change_mm = s.real(c + 1);
    t.measured_hz = s.real(c + 2);
    t.target_hz = s.real(c + 3);
    t.text = s.text(c + 4);
    r.trim = t;
  }
  c += 5;
  r.timings.total_s = s.real(c++);
  r.timings.sweep_s = s.real(c++);
  r.timings.analysis_s = s.real(c++);
  ++c;   // points_count: the points themselves are loaded on demand
  m.resonance_low_hz = s.optional_real(c++);
  m.resonance_high_hz = s.optional_real(c++);
  r.software = s.text(c++);
  m.resonance_interval_kind = s.text(c++);
  return r;
}

}  // namespace

RunStore::RunStore(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}

double RunStore::take_lock_wait_ms() {
  std::lock_guard lock(impl_->mutex);
  const double w = impl_->lock_wait_ms;
  impl_->lock_wait_ms = 0;
  return w;
}
RunStore::~RunStore() = default;

const std::filesystem::path& RunStore::path() const { return impl_->file; }

Result<std::unique_ptr<RunStore>> RunStore::open(const std::filesystem::path& file, StoreOptions options) {
  auto db = Database::open(file);
  if (!db.ok()) return db.error();
  if (auto s = detail::prepare_schema(*db, options.busy_timeout_ms); !s.ok()) return s.error();
  if (options.max_pages > 0) {
    if (auto s = db->exec(fmt::format("PRAGMA max_page_count={}", options.max_pages)); !s.ok()) return s.error();
  }
  auto impl = std::make_unique<Impl>();
  impl->db = std::move(*db);
  impl->options = std::move(options);
  impl->file = file;
  sqlite3_busy_handler(impl->db.handle(), &Impl::wait_for_lock, impl.get());
  return std::unique_ptr<RunStore>(new RunStore(std::move(impl)));
}

Result<std::unique_ptr<RunStore>> RunStore::open_read_only(const std::filesystem::path& file, StoreOptions options) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(file, ec)) {
    return make_error(ErrorKind::storage, fmt::format("run store {}: no such file", file.string()));
  }
  auto db = Database::open(file, /*read_only=*/true);
  if (!db.ok()) return db.error();
  if (auto s = detail::check_schema_read_only(*db, options.busy_timeout_ms); !s.ok()) return s.error();
  auto impl = std::make_unique<Impl>();
  impl->db = std::move(*db);
  impl->options = std::move(options);
  impl->file = file;
  return std::unique_ptr<RunStore>(new RunStore(std::move(impl)));
}

Status RunStore::save_run(const core::RunResult& run) {
  std::lock_guard lock(impl_->mutex);
  return impl_->store_run(run, false);
}

Status RunStore::begin_run(const core::RunResult& run) {
  std::lock_guard lock(impl_->mutex);
  core::RunResult record = run;
  record.verdict = core::Verdict::aborted;
  record.failure_class = core::FailureClass::none;
  record.reason = std::string(kInProgressReason);
  record.trim.reset();
  return impl_->store_run(record, true);
}

Status RunStore::Impl::store_run(const core::RunResult& run, bool in_progress) {
  if (auto s = validate_serial(run.serial, options.serial_pattern); !s.ok()) {
    return s.error().with_context(fmt::format("saving run '{}'", run.run_id));
  }
  if (run.run_id.empty()) return make_error(ErrorKind::invalid_argument, "saving run: run_id is empty");
  const std::string doing = fmt::format("{} run '{}' of serial '{}'", in_progress ? "recording the start of" : "saving",
                                        run.run_id, run.serial);
  auto write = [&]() -> Status {
    // A finished run replaces its own write-ahead record, keeping its place in insertion order.
    std::optional<long long> replaced_seq;
    {
      auto prior = db.prepare("SELECT seq, in_progress, serial FROM runs WHERE run_id = ?1");
      if (!prior.ok()) return prior.error();
      prior->bind(1, run.run_id);
      auto row = prior->step();
      if (!row.ok()) return fail(row.error(), doing);
      if (*row && prior->integer(1) == 1 && !in_progress) {
        if (prior->text(2) != run.serial) {
          return make_error(ErrorKind::invalid_argument,
                            fmt::format("run store {}: run '{}' was started for serial '{}', not '{}'", file.string(),
                                        run.run_id, prior->text(2), run.serial));
        }
        replaced_seq = prior->integer(0);
      }
    }
    if (replaced_seq) {
      for (const char* sql : {"DELETE FROM readings WHERE run_id = ?1", "DELETE FROM runs WHERE run_id = ?1"}) {
        auto del = db.prepare(sql);
        if (!del.ok()) return del.error();
        del->bind(1, run.run_id);
        if (auto st = del->run(); !st.ok()) return fail(st.error(), doing);
      }
      auto dec = db.prepare("UPDATE units SET run_count = run_count - 1 WHERE serial = ?1");
      if (!dec.ok()) return dec.error();
      dec->bind(1, run.serial);
      if (auto st = dec->run(); !st.ok()) return fail(st.error(), doing);
    }
    auto unit = db.prepare(
        "INSERT INTO units(serial, first_seen_utc, last_seen_utc, last_verdict, run_count) VALUES(?1, ?2, ?2, ?3, 1) "
        "ON CONFLICT(serial) DO UPDATE SET first_seen_utc = min(first_seen_utc, excluded.first_seen_utc), "
        "last_verdict = CASE WHEN excluded.last_seen_utc >= last_seen_utc THEN excluded.last_verdict ELSE last_verdict END, "
        "last_seen_utc = max(last_seen_utc, excluded.last_seen_utc), run_count = run_count + 1");
    if (!unit.ok()) return unit.error();
    unit->bind(1, run.serial).bind(2, run.started_utc).bind(3, core::to_string(run.verdict));
    if (auto s = unit->run(); !s.ok()) return fail(s.error(), doing);

    auto ins = db.prepare(fmt::format("INSERT INTO runs({}) VALUES(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,?14,?15,"
                                      "?16,?17,?18,?19,?20,?21,?22,?23,?24,?25,?26,?27,?28,?29,?30,?31,?32,?33,?34,?35,?36,?37,?38,?39,?40)",
                                      kRunColumns));
    if (!ins.ok()) return ins.error();
    Statement& s = *ins;
    const auto& m = run.metrics;
    int c = 0;
    auto b = [&](auto v) { s.bind(++c, v); };
    b(std::string_view(run.run_id)); b(std::string_view(run.serial)); b(std::string_view(run.lot));
    b(std::string_view(run.recipe.name)); b(std::string_view(run.recipe.version));
    b(std::string_view(run.recipe.content_hash)); b(std::string_view(run.decision_rule));
    b(std::string_view(run.station)); b(std::string_view(run.operator_name)); b(std::string_view(map_json(run.instruments)));
    b(std::string_view(run.started_utc)); b(std::string_view(run.ended_utc)); b(run.temperature_c);
    b(std::string_view(run.calibration_id)); b(run.retest ? 1 : 0); b(std::string_view(core::to_string(run.verdict)));
    b(std::string_view(core::to_string(run.failure_class))); b(std::string_view(run.reason));
    b(m.resonance_hz); b(m.depth_db); b(m.bandwidth_hz); b(m.band_low_hz); b(m.band_high_hz); b(m.min_margin_db);
    b(m.vswr_at_resonance); b(m.mismatch_loss_db); b(m.directivity_db);
    if (run.trim) {
      b(run.trim->element_length_mm); b(run.trim->change_mm); b(run.trim->measured_hz); b(run.trim->target_hz);
      b(std::string_view(run.trim->text));
    } else {
      for (int k = 0; k < 5; ++k) s.bind_null(++c);
    }
    b(run.timings.total_s); b(run.timings.sweep_s); b(run.timings.analysis_s);
    b(static_cast<long long>(run.points.size()));
    b(m.resonance_low_hz); b(m.resonance_high_hz);
    b(std::string_view(run.software)); b(std::string_view(m.resonance_interval_kind));
    if (auto st = s.run(); !st.ok()) {
      if (st.error().instrument_code == SQLITE_CONSTRAINT_UNIQUE) {
        return make_error(ErrorKind::invalid_argument,
                          fmt::format("run store {}: run '{}' is already stored (a retest is a new run with a new id)",
                                      file.string(), run.run_id));
      }
      return fail(st.error(), doing);
    }

    auto pts = db.prepare(
        "INSERT INTO readings(run_id, idx, frequency_hz, raw_dbm, rl_db, rl_worst_db, rl_best_db, offset_raw_dbm) "
        "VALUES(?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)");
    if (!pts.ok()) return pts.error();
    for (std::size_t i = 0; i < run.points.size(); ++i) {
      const auto& p = run.points[i];
      pts->reset();
      pts->bind(1, run.run_id).bind(2, static_cast<long long>(i)).bind(3, p.frequency_hz).bind(4, p.raw_dbm);
      pts->bind(5, p.return_loss_db).bind(6, p.return_loss_worst_db);
      // +inf best-case return loss (|Γ_m| within the directivity error) is stored as NULL.
      if (std::isinf(p.return_loss_best_db) && p.return_loss_best_db > 0) pts->bind_null(7);
      else pts->bind(7, p.return_loss_best_db);
      if (std::isfinite(p.offset_raw_dbm)) pts->bind(8, p.offset_raw_dbm);
      else pts->bind_null(8);
      if (auto st = pts->run(); !st.ok()) return fail(st.error(), fmt::format("{}: reading {}", doing, i));
    }
    if (in_progress || replaced_seq) {
      auto mark = db.prepare("UPDATE runs SET in_progress = ?2, seq = coalesce(?3, seq) WHERE run_id = ?1");
      if (!mark.ok()) return mark.error();
      mark->bind(1, run.run_id).bind(2, in_progress ? 1 : 0);
      if (replaced_seq) mark->bind(3, *replaced_seq);
      else mark->bind_null(3);
      if (auto st = mark->run(); !st.ok()) return fail(st.error(), doing);
    }
    // A finished run is committed: it waits in the outbox until the central database has it.
    if (!in_progress) return enqueue(run.run_id);
    return Status::success();
  };
  std::vector<std::optional<YieldSummary>> before(1), after(1);
  Status s = transaction(doing, [&]() -> Status {
    auto b = live_part(run.serial);
    if (!b.ok()) return b.error();
    before[0] = std::move(b.value());
    if (Status w = write(); !w.ok()) return w;
    auto a = live_part(run.serial);
    if (!a.ok()) return a.error();
    after[0] = std::move(a.value());
    return Status::success();
  });
  if (s.ok()) apply_live(before, after);
  return s;
}

Result<std::optional<YieldSummary>> RunStore::Impl::live_part(std::string_view serial) {
  if (!live) return std::optional<YieldSummary>{};
  auto st = db.prepare(fmt::format("SELECT serial, verdict, failure_class FROM runs WHERE serial = ?1 AND {} = ?2 "
                                   "ORDER BY started_utc, seq",
                                   yield_column(live->group)));
  if (!st.ok()) return st.error();
  st->bind(1, serial).bind(2, live->value);
  std::vector<RunOutcome> rows;
  for (;;) {
    auto r = st->step();
    if (!r.ok()) return fail(r.error(), "counting a serial's runs for the yield");
    if (!*r) break;
    rows.push_back(RunOutcome{live->value, st->text(0), st->text(1), st->text(2)});
  }
  auto parts = summarize_yield(rows);
  return std::optional<YieldSummary>(parts.empty() ? YieldSummary{} : std::move(parts.front()));
}

void RunStore::Impl::apply_live(const std::vector<std::optional<YieldSummary>>& before,
                                const std::vector<std::optional<YieldSummary>>& after) {
  if (!live) return;
  for (const auto& b : before) {
    if (b) add_yield(live->yield, *b, -1);
  }
  for (const auto& a : after) {
    if (a) add_yield(live->yield, *a, +1);
  }
}

Result<std::vector<std::string>> RunStore::Impl::in_progress_ids() {
  auto st = db.prepare("SELECT run_id FROM runs WHERE in_progress = 1 ORDER BY started_utc, seq");
  if (!st.ok()) return st.error();
  std::vector<std::string> ids;
  for (;;) {
    auto row = st->step();
    if (!row.ok()) return fail(row.error(), "listing runs in progress");
    if (!*row) break;
    ids.push_back(st->text(0));
  }
  return ids;
}

Result<std::vector<std::string>> RunStore::runs_in_progress() {
  std::lock_guard lock(impl_->mutex);
  return impl_->in_progress_ids();
}

Result<std::vector<std::string>> RunStore::finalize_interrupted(std::string_view reason, std::string_view ended_utc) {
  std::lock_guard lock(impl_->mutex);
  std::vector<std::string> ids;
  std::vector<std::optional<YieldSummary>> before, after;
  Status s = impl_->transaction("finalizing runs left in progress", [&]() -> Status {
    auto found = impl_->in_progress_ids();
    if (!found.ok()) return found.error();
    ids = std::move(found.value());
    if (ids.empty()) return Status::success();
    std::vector<std::string> serials;
    {
      auto q = impl_->db.prepare("SELECT DISTINCT serial FROM runs WHERE in_progress = 1");
      if (!q.ok()) return q.error();
      for (;;) {
        auto row = q->step();
        if (!row.ok()) return impl_->fail(row.error(), "finalizing runs left in progress");
        if (!*row) break;
        serials.push_back(q->text(0));
      }
    }
    for (const auto& serial : serials) {
      auto b = impl_->live_part(serial);
      if (!b.ok()) return b.error();
      before.push_back(std::move(b.value()));
    }
    auto st = impl_->db.prepare(
        "UPDATE runs SET in_progress = 0, verdict = 'aborted', failure_class = '', reason = ?1, ended_utc = ?2, "
        "points_count = (SELECT count(*) FROM readings WHERE readings.run_id = runs.run_id) WHERE in_progress = 1");
    if (!st.ok()) return st.error();
    st->bind(1, reason).bind(2, ended_utc);
    if (auto r = st->run(); !r.ok()) return impl_->fail(r.error(), "finalizing runs left in progress");
    for (const auto& id : ids) {
      if (auto q = impl_->enqueue(id); !q.ok()) return q;
    }
    for (const auto& serial : serials) {
      auto a = impl_->live_part(serial);
      if (!a.ok()) return a.error();
      after.push_back(std::move(a.value()));
    }
    return Status::success();
  });
  if (!s.ok()) return s.error();
  impl_->apply_live(before, after);
  return ids;
}

Status RunStore::save_recipe_text(std::string_view hash, std::string_view name, std::string_view version,
                                  std::string_view text) {
  std::lock_guard lock(impl_->mutex);
  if (hash.empty()) return make_error(ErrorKind::invalid_argument, "saving recipe text: content hash is empty");
  auto st = impl_->db.prepare(
      "INSERT INTO recipes(content_hash, name, version, text) VALUES(?1,?2,?3,?4) ON CONFLICT(content_hash) DO NOTHING");
  if (!st.ok()) return st.error();
  st->bind(1, hash).bind(2, name).bind(3, version).bind(4, text);
  if (auto s = st->run(); !s.ok()) return impl_->fail(s.error(), fmt::format("saving the text of recipe {} {}", name, version));
  return Status::success();
}

Result<std::optional<std::string>> RunStore::recipe_text(std::string_view hash) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare("SELECT text FROM recipes WHERE content_hash = ?1");
  if (!st.ok()) return st.error();
  st->bind(1, hash);
  auto row = st->step();
  if (!row.ok()) return impl_->fail(row.error(), "loading a recipe text");
  if (!*row) return std::optional<std::string>{};
  return std::optional<std::string>(st->text(0));
}

Status RunStore::save_calibration(const core::CalibrationRecord& cal) {
  std::lock_guard lock(impl_->mutex);
  if (cal.id.empty()) return make_error(ErrorKind::invalid_argument, "saving calibration: id is empty");
  auto& db = impl_->db;
  const std::string doing = fmt::format("saving calibration '{}'", cal.id);
  return impl_->transaction(doing, [&]() -> Status {
    auto ins = db.prepare(
        "INSERT INTO calibrations(id, created_utc, recipe_name, recipe_version, recipe_hash, station, instruments_json, "
        "temperature_c, reference_json, directivity_json, min_directivity_db, warnings_json, valid, max_age_s, max_units, "
        "max_temperature_change_c, noise_margin_db, units_since, errors_json, kit_identity, kit_serial, budget_json, "
        "software) "
        "VALUES(?1,?2,?3,?4,?5,?6,?7,?8,?9,?10,?11,?12,?13,?14,?15,?16,?17,?18,?19,?20,?21,?22,?23)");
    if (!ins.ok()) return ins.error();
    auto& s = *ins;
    s.bind(1, cal.id).bind(2, cal.created_utc).bind(3, cal.recipe.name).bind(4, cal.recipe.version);
    s.bind(5, cal.recipe.content_hash).bind(6, cal.station).bind(7, map_json(cal.instruments));
    s.bind(8, cal.temperature_c).bind(9, doubles_json(cal.reference_dbm)).bind(10, doubles_json(cal.directivity_db));
    s.bind(11, cal.min_directivity_db).bind(12, nlohmann::json(cal.warnings).dump()).bind(13, cal.valid ? 1 : 0);
    s.bind(14, cal.max_age_s).bind(15, cal.max_units).bind(16, cal.max_temperature_change_c);
    s.bind(17, cal.noise_margin_db).bind(18, cal.units_since).bind(19, nlohmann::json(cal.errors).dump());
    s.bind(20, cal.kit_identity).bind(21, cal.kit_serial).bind(22, budget_to_json(cal.budget)).bind(23, cal.software);
    if (auto st = s.run(); !st.ok()) {
      if (st.error().instrument_code == SQLITE_CONSTRAINT_UNIQUE) {
        return make_error(ErrorKind::invalid_argument, fmt::format("run store {}: calibration '{}' is already stored",
                                                                   impl_->file.string(), cal.id));
      }
      return impl_->fail(st.error(), doing);
    }
    auto tr = db.prepare(
        "INSERT INTO calibration_traces(calibration_id, standard, idx, frequency_hz, raw_dbm) VALUES(?1,?2,?3,?4,?5)");
    if (!tr.ok()) return tr.error();
    for (const auto& [standard, readings] : cal.traces) {
      for (std::size_t i = 0; i < readings.size(); ++i) {
        tr->reset();
        tr->bind(1, cal.id).bind(2, standard).bind(3, static_cast<long long>(i));
        tr->bind(4, readings[i].frequency_hz).bind(5, readings[i].raw_dbm);
        if (auto st = tr->run(); !st.ok()) return impl_->fail(st.error(), doing);
      }
    }
    return Status::success();
  });
}

Status RunStore::set_calibration_units(std::string_view calibration_id, int units_since, int units_since_check) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare("UPDATE calibrations SET units_since = ?2, units_since_check = ?3 WHERE id = ?1");
  if (!st.ok()) return st.error();
  st->bind(1, calibration_id).bind(2, units_since).bind(3, units_since_check);
  if (auto s = st->run(); !s.ok()) return impl_->fail(s.error(), "updating calibration unit count");
  if (sqlite3_changes(impl_->db.handle()) == 0) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("run store {}: no calibration '{}'", impl_->file.string(), calibration_id));
  }
  return Status::success();
}

Status RunStore::invalidate_calibration(std::string_view id, std::string_view reason) {
  std::lock_guard lock(impl_->mutex);
  if (reason.empty()) {
    return make_error(ErrorKind::invalid_argument,
                      fmt::format("run store {}: invalidating calibration '{}': the reason is empty", impl_->file.string(), id));
  }
  const std::string doing = fmt::format("invalidating calibration '{}'", id);
  {
    auto exists = impl_->db.prepare("SELECT invalidated_reason FROM calibrations WHERE id = ?1");
    if (!exists.ok()) return impl_->fail(exists.error(), doing);
    exists->bind(1, id);
    auto row = exists->step();
    if (!row.ok()) return impl_->fail(row.error(), doing);
    if (!*row) {
      return make_error(ErrorKind::invalid_argument, fmt::format("run store {}: no calibration '{}'", impl_->file.string(), id));
    }
    if (!exists->is_null(0)) return Status::success();   // already invalid: the first reason stands
  }
  // The time in the station's form, "YYYY-MM-DDTHH:MM:SS.fffZ" (SQLite's clock is UTC).
  auto st = impl_->db.prepare(
      "UPDATE calibrations SET invalidated_reason = ?2, invalidated_utc = strftime('%Y-%m-%dT%H:%M:%fZ', 'now') "
      "WHERE id = ?1 AND invalidated_reason IS NULL");
  if (!st.ok()) return impl_->fail(st.error(), doing);
  st->bind(1, id).bind(2, reason);
  if (auto s = st->run(); !s.ok()) return impl_->fail(s.error(), doing);
  return Status::success();
}

Status RunStore::Impl::load_points(core::RunResult& run) {
  auto st = db.prepare(
      "SELECT frequency_hz, raw_dbm, rl_db, rl_worst_db, rl_best_db, offset_raw_dbm FROM readings WHERE run_id = ?1 "
      "ORDER BY idx");
  if (!st.ok()) return st.error();
  st->bind(1, run.run_id);
  for (;;) {
    auto row = st->step();
    if (!row.ok()) return fail(row.error(), fmt::format("loading readings of run '{}'", run.run_id));
    if (!*row) break;
    core::PointResult p;
    p.frequency_hz = st->real(0);
    p.raw_dbm = st->real(1);
    p.return_loss_db = st->real(2);
    p.return_loss_worst_db = st->real(3);
    p.return_loss_best_db = st->is_null(4) ? kInf : st->real(4);
    if (!st->is_null(5)) p.offset_raw_dbm = st->real(5);
    run.points.push_back(p);
  }
  return Status::success();
}

Result<std::vector<core::RunResult>> RunStore::Impl::select_runs(std::string_view where,
                                                                 const std::vector<std::string>& params,
                                                                 bool with_points, std::string_view doing) {
  auto st = db.prepare(fmt::format("SELECT {} FROM runs WHERE {} ORDER BY started_utc, seq", kRunColumns, where));
  if (!st.ok()) return st.error();
  for (std::size_t i = 0; i < params.size(); ++i) st->bind(static_cast<int>(i + 1), params[i]);
  std::vector<core::RunResult> out;
  for (;;) {
    auto row = st->step();
    if (!row.ok()) return fail(row.error(), doing);
    if (!*row) break;
    out.push_back(run_from_row(*st));
  }
  if (with_points) {
    for (auto& r : out) {
      if (auto s = load_points(r); !s.ok()) return s.error();
    }
  }
  return out;
}

Result<core::RunResult> RunStore::load_run(std::string_view run_id) {
  std::lock_guard lock(impl_->mutex);
  auto runs = impl_->select_runs("run_id = ?1", {std::string(run_id)}, true, "loading a run");
  if (!runs.ok()) return runs.error();
  if (runs->empty()) {
    return make_error(ErrorKind::invalid_argument, fmt::format("run store {}: no run '{}'", impl_->file.string(), run_id));
  }
  return std::move(runs->front());
}

Result<std::vector<core::RunResult>> RunStore::history(std::string_view serial, bool with_points) {
  std::lock_guard lock(impl_->mutex);
  return impl_->select_runs("serial = ?1", {std::string(serial)}, with_points, "loading a serial's history");
}

Result<std::vector<core::RunResult>> RunStore::lot_runs(std::string_view lot, bool with_points) {
  std::lock_guard lock(impl_->mutex);
  return impl_->select_runs("lot = ?1", {std::string(lot)}, with_points, "loading a lot's runs");
}

Result<std::vector<core::RunResult>> RunStore::runs_between(std::string_view from_utc, std::string_view to_utc,
                                                            bool with_points) {
  std::lock_guard lock(impl_->mutex);
  return impl_->select_runs("started_utc >= ?1 AND started_utc < ?2", {std::string(from_utc), std::string(to_utc)},
                            with_points, "loading runs in a time range");
}

Result<int> RunStore::run_count(std::string_view serial) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare("SELECT count(*) FROM runs WHERE serial = ?1");
  if (!st.ok()) return st.error();
  st->bind(1, serial);
  auto row = st->step();
  if (!row.ok()) return impl_->fail(row.error(), "counting runs");
  return static_cast<int>(st->integer(0));
}

Result<std::optional<std::string>> RunStore::latest_lot() {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare("SELECT lot FROM runs WHERE lot <> '' ORDER BY started_utc DESC, seq DESC LIMIT 1");
  if (!st.ok()) return st.error();
  auto row = st->step();
  if (!row.ok()) return impl_->fail(row.error(), "finding the latest lot");
  if (!*row) return std::optional<std::string>{};
  return std::optional<std::string>(st->text(0));
}

Result<std::optional<UnitSummary>> RunStore::unit(std::string_view serial) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare(
      "SELECT serial, first_seen_utc, last_seen_utc, last_verdict, run_count FROM units WHERE serial = ?1");
  if (!st.ok()) return st.error();
  st->bind(1, serial);
  auto row = st->step();
  if (!row.ok()) return impl_->fail(row.error(), "loading a unit");
  if (!*row) return std::optional<UnitSummary>{};
  UnitSummary u{st->text(0), st->text(1), st->text(2), st->text(3), static_cast<int>(st->integer(4))};
  return std::optional<UnitSummary>(std::move(u));
}

Result<std::optional<core::CalibrationRecord>> RunStore::Impl::select_calibration(std::string_view where,
                                                                                   std::string_view param) {
  auto st = db.prepare(fmt::format(
      "SELECT id, created_utc, recipe_name, recipe_version, recipe_hash, station, instruments_json, temperature_c, "
      "reference_json, directivity_json, min_directivity_db, warnings_json, valid, max_age_s, max_units, "
      "max_temperature_change_c, noise_margin_db, units_since, errors_json, invalidated_reason, invalidated_utc, "
      "kit_identity, kit_serial, budget_json, software, units_since_check "
      "FROM calibrations {} ORDER BY created_utc DESC, seq DESC "
      "LIMIT 1",
      where));
  if (!st.ok()) return st.error();
  if (!param.empty()) st->bind(1, param);
  auto row = st->step();
  if (!row.ok()) return fail(row.error(), "loading a calibration");
  if (!*row) return std::optional<core::CalibrationRecord>{};
  core::CalibrationRecord c;
  c.id = st->text(0);
  c.created_utc = st->text(1);
  c.recipe = {st->text(2), st->text(3), st->text(4)};
  c.station = st->text(5);
  c.instruments = map_from_json(st->text(6));
  c.temperature_c = st->optional_real(7);
  c.reference_dbm = doubles_from_json(st->text(8));
  c.directivity_db = doubles_from_json(st->text(9));
  c.min_directivity_db = st->real(10);
  auto w = nlohmann::json::parse(st->text(11), nullptr, false);
  if (w.is_array()) {
    for (auto& x : w) {
      if (x.is_string()) c.warnings.push_back(x.get<std::string>());
    }
  }
  c.valid = st->integer(12) != 0;
  c.max_age_s = st->real(13);
  c.max_units = static_cast<int>(st->integer(14));
  c.max_temperature_change_c = st->real(15);
  c.noise_margin_db = st->real(16);
  c.units_since = static_cast<int>(st->integer(17));
  c.units_since_check = static_cast<int>(st->integer(25));
  auto errs = nlohmann::json::parse(st->text(18), nullptr, false);
  if (errs.is_array()) {
    for (auto& x : errs) {
      if (x.is_string()) c.errors.push_back(x.get<std::string>());
    }
  }
  c.kit_identity = st->text(21);
  c.kit_serial = st->text(22);
  if (auto budget = budget_from_json(st->text(23))) {
    c.budget = std::move(*budget);
  } else {
    c.valid = false;
    c.errors.push_back("the stored uncertainty budget is unreadable");
  }
  c.software = st->text(24);
  if (!st->is_null(19)) {
    // Invalidated after it was made (e.g. check-standard drift): never usable again.
    c.valid = false;
    c.errors.push_back(fmt::format("invalidated at {}: {}", st->is_null(20) ? std::string("an unknown time") : st->text(20),
                                   st->text(19)));
  }
  auto tr = db.prepare(
      "SELECT standard, frequency_hz, raw_dbm FROM calibration_traces WHERE calibration_id = ?1 ORDER BY standard, idx");
  if (!tr.ok()) return tr.error();
  tr->bind(1, c.id);
  for (;;) {
    auto r = tr->step();
    if (!r.ok()) return fail(r.error(), "loading calibration traces");
    if (!*r) break;
    c.traces[tr->text(0)].push_back(core::Reading{tr->real(1), tr->real(2)});
  }
  return std::optional<core::CalibrationRecord>(std::move(c));
}

Result<std::optional<core::CalibrationRecord>> RunStore::latest_calibration() {
  std::lock_guard lock(impl_->mutex);
  return impl_->select_calibration("", "");
}

Result<std::optional<core::CalibrationRecord>> RunStore::load_calibration(std::string_view id) {
  std::lock_guard lock(impl_->mutex);
  if (id.empty()) return std::optional<core::CalibrationRecord>{};
  return impl_->select_calibration("WHERE id = ?1", id);
}

Result<std::vector<YieldSummary>> RunStore::yield_by(YieldGroup group, std::string_view only) {
  std::lock_guard lock(impl_->mutex);
  return impl_->count_yield(group, only);
}

Result<YieldSummary> RunStore::live_yield(YieldGroup group, std::string_view value) {
  std::lock_guard lock(impl_->mutex);
  if (value.empty()) return make_error(ErrorKind::invalid_argument, "live yield: no group value given");
  if (!impl_->live || impl_->live->group != group || impl_->live->value != value) {
    impl_->live.reset();
    auto counted = impl_->count_yield(group, value);
    if (!counted.ok()) return counted.error();
    impl_->live = Impl::LiveYield{group, std::string(value), counted->empty() ? YieldSummary{} : counted->front()};
  }
  if (impl_->live->yield.runs == 0) return YieldSummary{};
  YieldSummary y = impl_->live->yield;
  y.group = impl_->live->value;
  return y;
}

Result<std::vector<YieldSummary>> RunStore::Impl::count_yield(YieldGroup group, std::string_view only) {
  const char* column = yield_column(group);
  const std::string where = only.empty() ? std::string() : fmt::format("WHERE {} = ?1", column);
  auto st = db.prepare(
      fmt::format("SELECT {0}, serial, verdict, failure_class FROM runs {1} ORDER BY {0}, started_utc, seq", column, where));
  if (!st.ok()) return st.error();
  if (!only.empty()) st->bind(1, only);
  std::vector<RunOutcome> rows;
  for (;;) {
    auto r = st->step();
    if (!r.ok()) return fail(r.error(), "computing yield");
    if (!*r) break;
    rows.push_back(RunOutcome{st->text(0), st->text(1), st->text(2), st->text(3)});
  }
  return summarize_yield(rows);
}

Result<std::string> RunStore::integrity_check() {
  std::lock_guard lock(impl_->mutex);
  return impl_->db.query_text("PRAGMA integrity_check");
}

}  // namespace echoline::store
