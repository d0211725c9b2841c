// The station's jobs: unit test, calibration, check standard; and its state for status.
#include "daemon/service/station.hpp"

#include <algorithm>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <limits>
#include <random>
#include <stdexcept>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/core/cal_kit_loader.hpp"
#include "daemon/core/decision.hpp"
#include "daemon/core/judge.hpp"
#include "daemon/core/offset_pair_check.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/core/rf_math.hpp"
#include "daemon/core/station_capability.hpp"
#include "drivers/config_error.hpp"
#include "drivers/jsonc.hpp"
#include "daemon/service/clock.hpp"
#include "daemon/service/fast_capture.hpp"
#include "daemon/store/export.hpp"
#include "daemon/store/serial.hpp"
#include "echoline/version.hpp"

namespace echoline::service {
namespace {

using nlohmann::json;
using Clock = std::chrono::steady_clock;

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

json recipe_json(const core::Recipe& r) {
  return {{"name", r.name},
          {"version", r.version},
          {"content_hash", r.content_hash},
          {"path", r.source_path},
          {"points", core::plan_frequencies(r).size()},
          {"decision_rule", core::to_string(r.rule)}};
}

json findings_json(const std::vector<core::CheckFinding>& findings) {
  json out = json::array();
  for (const auto& f : findings) out.push_back({{"severity", f.severity}, {"key", f.key}, {"message", f.message}});
  return out;
}

// The reason of a run the instruments stopped begins "instrument trouble: " in the operator's
// words, then the driver's message (instrument, command, reply); the console reads that prefix
// to tell instrument trouble from other aborts (exit code 4, "call the engineer").
std::string aborted_reason(const Error& e) {
  switch (e.kind) {
    case ErrorKind::timeout:
    case ErrorKind::io:
    case ErrorKind::closed:
    case ErrorKind::protocol:
    case ErrorKind::instrument:
      return fmt::format("{}{}", core::kInstrumentTroublePrefix, e.message);
    default:
      return e.message;
  }
}

// Why the newest calibration does not count, the same words while running and after a restart:
// its first error is the cause (a calibration that failed its sanity checks lists them first; a
// valid one later invalidated by a drifted check standard has that as its only error; what the
// store adds on loading comes after).
std::string not_valid_text(const core::CalibrationRecord& c) {
  return fmt::format("the last calibration ({}) was not valid: {}", c.id,
                     c.errors.empty() ? std::string("sanity checks failed") : c.errors.front());
}

// The raw readings of a run that was not judged (aborted, or refused by the judge), kept with
// the offset line's where there are any: the store loses nothing that was measured.
std::vector<core::PointResult> unjudged_points(const std::vector<core::Reading>& direct,
                                               const std::vector<core::Reading>& offset) {
  const double nan = std::numeric_limits<double>::quiet_NaN();
  std::vector<core::PointResult> out;
  out.reserve(direct.size());
  for (std::size_t i = 0; i < direct.size(); ++i) {
    out.push_back(core::PointResult{direct[i].frequency_hz, direct[i].raw_dbm, nan, nan, nan,
                                    i < offset.size() ? offset[i].raw_dbm : nan});
  }
  return out;
}

std::string random_hex4() {
  static thread_local std::mt19937 rng{std::random_device{}()};
  return fmt::format("{:04x}", rng() & 0xffffu);
}

// The recipe's sweep mode picks the engine; both return the same SweepOutcome.
SweepOutcome run_sweep(Instruments& instruments, const core::Recipe& recipe, const drivers::FixtureConfig& fixture,
                       const std::atomic<bool>& cancel, const ProgressFn& progress) {
  SweepOptions so;
  so.coupling_db = fixture.coupling_db;
  if (recipe.mode == core::SweepMode::fast_capture) {
    auto plan = core::plan_fast_capture(recipe, fixture, instruments.source_profile(), instruments.receiver_profile());
    if (!plan) {
      SweepOutcome out;
      out.error = plan.error();
      return out;
    }
    return run_fast_capture(instruments.source(), instruments.receiver(), recipe, *plan, cancel, progress, so);
  }
  SweepEngine engine(instruments.source(), instruments.receiver(), so);
  return engine.run(recipe, cancel, progress);
}

}  // namespace

// ---- CancelToken ----
void CancelToken::cancel(std::string reason) {
  {
    std::lock_guard lock(mu_);
    if (!flag_.load()) reason_ = std::move(reason);
  }
  flag_.store(true);
}
void CancelToken::reset() {
  std::lock_guard lock(mu_);
  reason_.clear();
  flag_.store(false);
}
std::string CancelToken::reason() const {
  std::lock_guard lock(mu_);
  return reason_;
}

// ---- JSON views ----
json run_json(const core::RunResult& run) {
  json j = store::run_to_json(run, /*with_points=*/false);
  if (!j.contains("points_count")) j["points_count"] = run.points.size();
  return j;
}

json calibration_summary_json(const core::CalibrationRecord& cal) {
  // The budget in brief: the worst directivity bound (as dB) and the measured reading noise.
  double worst_bound = 0;
  for (double e : cal.budget.directivity_bound) worst_bound = std::max(worst_bound, e);
  json noise = json::array();
  for (const auto& n : cal.budget.noise) {
    noise.push_back({{"start_hz", n.start_hz}, {"stop_hz", n.stop_hz}, {"measured", n.measured},
                     {"high_level_db", n.high_level_db}, {"load_level_db", n.load_level_db}});
  }
  json budget = {{"coverage_factor", cal.budget.coverage_factor},
                 {"directivity_bound_db", worst_bound > 0 ? json(-20 * std::log10(worst_bound)) : json(nullptr)},
                 {"reading_noise", noise}};
  return {{"id", cal.id},
          {"kit", {{"identity", cal.kit_identity}, {"serial", cal.kit_serial}}},
          {"budget", budget},
          {"software", cal.software},
          {"created_utc", cal.created_utc},
          {"valid", cal.valid},
          {"warnings", cal.warnings},
          {"min_directivity_db", cal.min_directivity_db},
          {"noise_margin_db", cal.noise_margin_db},
          {"recipe", {{"name", cal.recipe.name}, {"version", cal.recipe.version}}},
          {"units_since", cal.units_since}};
}

// ---- Station ----
Station::Station(drivers::StationConfig config) : config_(std::move(config)) {
  if (config_.calibration_kit.empty()) {
    kit_ = core::builtin_conservative_kit();
    spdlog::warn("station config names no calibration_kit: using the built-in conservative kit (wider bounds)");
  } else {
    kit_ = core::load_cal_kit(config_.calibration_kit);
    spdlog::info("calibration kit: {} serial {} ({})", kit_.identity, kit_.serial, config_.calibration_kit.string());
  }
  std::shared_ptr<core::Recipe> recipe;
  try {
    recipe = std::make_shared<core::Recipe>(core::load_recipe(config_.recipe));
  } catch (const drivers::ConfigError& e) {
    // The file itself could not be read: name the station config's key that points at it.
    if (e.line > 0 || !e.key.empty()) throw;
    throw drivers::ConfigError(config_.file, config_.recipe_line, "/recipe",
                               fmt::format("{}: {}", config_.recipe.string(), e.message));
  }
  instruments_ = std::make_unique<Instruments>(config_);
  auto findings = core::check_recipe(*recipe, capability(*recipe));
  for (const auto& f : findings) spdlog::log(f.severity == "error" ? spdlog::level::err : spdlog::level::warn,
                                             "recipe {}: {}: {}", recipe->source_path, f.key, f.message);
  if (core::has_errors(findings)) {
    for (const auto& f : findings) {
      if (f.severity == "error") {
        // A configuration error (exit 2): the recipe and the station's instruments do not fit.
        int line = 0;
        try {
          line = drivers::JsoncDocument::load(recipe->source_path)
                     .line_of(nlohmann::json::json_pointer(f.key.empty() || f.key[0] != '/' ? "" : f.key));
        } catch (const std::exception&) {
          line = 0;   // the message still names the file and the key
        }
        throw drivers::ConfigError(recipe->source_path, line, f.key,
                                   fmt::format("cannot run on station {}: {}", config_.station, f.message));
      }
    }
  }
  recipe_ = recipe;

  std::error_code ec;
  std::filesystem::create_directories(config_.data_dir, ec);
  const auto db = config_.data_dir / (config_.station + ".sqlite");
  store::StoreOptions so;
  so.serial_pattern = config_.serial_pattern;
  auto opened = store::RunStore::open(db, so);
  if (!opened) throw std::runtime_error(opened.error().message);
  store_ = std::move(opened.value());
  if (Status s = store_->save_recipe_text(recipe->content_hash, recipe->name, recipe->version, recipe->source_text); !s) {
    spdlog::error("recipe text not kept for offline re-judging: {}", s.error().message);
  }

  auto instance = store_->instance_id();
  if (!instance) throw std::runtime_error(instance.error().message);
  instance_id_ = *instance;
  auto last_number = store_->last_run_number();
  if (!last_number) throw std::runtime_error(last_number.error().message);
  run_counter_ = static_cast<std::uint64_t>(*last_number);

  // Runs are queued for forwarding only when a central database is configured (before the runs
  // left in progress are finalized, so they follow the same rule). A station that gets one later
  // queues, once, every run it committed while it had none.
  const bool central = !config_.central_settings.empty();
  auto queue = store_->set_central_configured(central, utc_iso8601(unix_now_s()));
  if (!queue) throw std::runtime_error(queue.error().message);
  if (queue->queued > 0) {
    spdlog::info("{} runs committed while no central database was configured (since {}) are queued for it",
                 queue->queued, queue->unqueued_since_utc);
  }
  if (queue->unqueued > 0) {
    spdlog::warn("no central database configured: {} runs waiting to be forwarded left the outbox; they stay in {} and "
                 "are queued again when a central database is configured", queue->unqueued, db.string());
  }

  // Runs a killed or crashed daemon left in progress: on record as aborted, never as a pass.
  auto interrupted = store_->finalize_interrupted(store::kStoppedUnexpectedlyReason, utc_iso8601(unix_now_s()));
  if (!interrupted) throw std::runtime_error(interrupted.error().message);
  for (const auto& id : *interrupted) {
    spdlog::warn("run {} was still in progress when the daemon stopped: stored as aborted ({})", id,
                 store::kStoppedUnexpectedlyReason);
  }

  // This station's yield for /metrics: counted once here, then kept as runs commit.
  if (auto yield = store_->live_yield(store::YieldGroup::station, config_.station); !yield) {
    throw std::runtime_error(yield.error().message);
  }

  if (!config_.central_settings.empty()) {
    auto settings = central::load_settings(config_.central_settings);
    if (!settings) throw std::runtime_error(settings.error().message);
    forwarder_ = std::make_unique<central::Forwarder>(db, so, std::move(settings.value()), central::kit_document(kit_));
  } else {
    spdlog::info("no central database configured: runs stay in {}", db.string());
  }

  auto latest = store_->latest_calibration();
  if (!latest) throw std::runtime_error(latest.error().message);
  if (latest->has_value() && latest->value().valid) {
    calibration_ = latest->value();
    calibration_created_s_ = parse_utc_iso8601(calibration_->created_utc).value_or(0);
    units_since_check_ = calibration_->units_since_check;   // a restart does not put off the check standard
    spdlog::info("calibration {} from {} loaded ({} units since, {} since the check standard)", calibration_->id,
                 calibration_->created_utc, calibration_->units_since, units_since_check_);
  } else if (latest->has_value()) {
    // Not loaded; say why (e.g. invalidated by a drifted check standard before a restart).
    check_failure_ = not_valid_text(latest->value());
    spdlog::warn("{}", check_failure_);
  }
}

Station::~Station() = default;

void Station::connect_instruments() {
  if (Status s = instruments_->ensure_ready(1); !s) {
    spdlog::warn("instruments not all ready at start: {}", s.error().message);
  }
}

void Station::probe_instruments() {
  if (Status s = instruments_->ensure_ready(1); !s) {
    spdlog::warn("instruments probed, not all ready: {}", s.error().message);
  }
}

void Station::shutdown() {
  instruments_->close_all();
  if (forwarder_) forwarder_->stop();
  forwarder_.reset();
  store_.reset();
}

std::shared_ptr<const core::Recipe> Station::recipe() const {
  std::lock_guard lock(mu_);
  return recipe_;
}

core::StationCapability Station::capability(const core::Recipe& recipe) const {
  const drivers::Switch* sw = instruments_->switch_();
  return core::station_capability(config_.fixture, instruments_->source_profile(), instruments_->receiver_profile(), recipe,
                                  &kit_, sw ? &sw->profile() : nullptr);
}

std::vector<std::string> Station::standards() const {
  return standards_of(*recipe());
}

std::vector<std::string> Station::standards_of(const core::Recipe& r) const {
  std::vector<std::string> out = {"OPEN", "LOAD"};
  if (r.calibration.use_short) out.insert(out.begin() + 1, "SHORT");
  if (r.calibration.use_mismatch) {
    for (const core::MismatchStandard& m : kit_.mismatch) out.push_back(m.name);
  }
  return out;
}

std::string Station::standard_description(const std::string& standard) const {
  if (standard == core::kOffsetArm) {
    return "the unit behind the kit's offset line (fit the line to the test port and the unit to its far end; take "
           "the line off again before the next unit)";
  }
  const core::MismatchStandard* m = core::find_mismatch(kit_, standard);
  return m ? core::describe_mismatch(*m) : std::string();
}

int Station::plan_points() const { return static_cast<int>(core::plan_frequencies(*recipe()).size()); }

json Station::calibration_json() const {
  std::lock_guard lock(mu_);
  json j = {{"present", calibration_.has_value()}};
  const core::StationCapability now = capability(*recipe_);
  const double offset_hz = recipe_->mode == core::SweepMode::fast_capture ? now.frequency_offset_hz : -1;
  core::CalibrationState st = core::calibration_due(calibration_ ? &*calibration_ : nullptr, *recipe_, unix_now_s(),
                                                    calibration_created_s_, std::nullopt, offset_hz, &now);
  if (!check_failure_.empty()) st = {true, check_failure_};
  if (calibration_) {
    j.update(calibration_summary_json(*calibration_));
    // When the next calibration falls due by age or by count (a drifted check standard or a
    // temperature change can make it due sooner).
    j["expires_utc"] = utc_iso8601(calibration_created_s_ + recipe_->calibration.max_age_s);
    j["max_units"] = recipe_->calibration.max_units;
  }
  j["due"] = st.due;
  j["reason"] = st.reason;
  json standards = json::array();
  for (const auto& name : standards_of(*recipe_)) {
    standards.push_back({{"name", name}, {"description", standard_description(name)}});
  }
  j["standards"] = standards;
  const int every = recipe_->calibration.check_every_units;
  j["check"] = {{"standard", recipe_->calibration.check_standard},
                {"every_units", every},
                {"units_since", units_since_check_},
                {"due", every > 0 && calibration_ && units_since_check_ >= every}};
  return j;
}

json Station::status_json() const {
  json instruments = json::array();
  for (const auto& h : instruments_->health()) {
    instruments.push_back({{"role", h.role},
                           {"name", h.name},
                           {"address", h.address},
                           {"identity", h.identity},
                           {"healthy", h.healthy},
                           {"last_error", h.last_error},
                           {"errors", h.errors},
                           {"reconnects", h.reconnects}});
  }
  auto r = recipe();
  return {{"station", config_.station},
          {"version", std::string(version())},
          {"recipe", recipe_json(*r)},
          {"instruments", instruments},
          {"calibration", calibration_json()},
          {"forwarding", forwarding_json()}};
}

void Station::note_commit(double ms) {
  const double waited = store_->take_lock_wait_ms();
  std::lock_guard lock(mu_);
  lock_wait_ms_last_ = waited;
  lock_wait_ms_max_ = std::max(lock_wait_ms_max_, waited);
  commit_ms_last_ = ms;
  commit_ms_max_ = std::max(commit_ms_max_, ms);
  ++commits_;
}

json Station::forwarding_json() const {
  json j = {{"configured", forwarder_ != nullptr}};
  if (forwarder_) j.update(forwarder_->status_json());
  if (store_) {
    auto st = store_->outbox_status();
    if (st) {
      j["outbox_depth"] = st->depth;
      j["outbox_refused"] = st->refused;
      j["oldest_unforwarded_run"] = st->oldest_run_id;
      j["oldest_unforwarded_utc"] = st->oldest_committed_utc;
      j["last_forward_utc"] = st->last_forward_utc;
      j["last_forwarded_run"] = st->last_run_id;
      j["forwarded_runs"] = st->forwarded_runs;
      j["queueing"] = st->queueing;
      j["unqueued_since_utc"] = st->unqueued_since_utc;
    } else {
      j["outbox_error"] = st.error().message;
    }
  }
  std::lock_guard lock(mu_);
  j["store_commit_ms"] = {{"last", commit_ms_last_},
                          {"max", commit_ms_max_},
                          {"runs", commits_},
                          {"lock_wait_last", lock_wait_ms_last_},
                          {"lock_wait_max", lock_wait_ms_max_}};
  return j;
}

std::optional<Refusal> Station::precheck_test(const TestRequest& request) const {
  if (Status s = store::validate_serial(request.serial, config_.serial_pattern); !s) {
    return Refusal{"invalid_serial", s.error().message};
  }
  json cal = calibration_json();
  if (cal["due"].get<bool>()) {
    return Refusal{"calibration_due",
                   fmt::format("calibration due: {}; calibrate the station before testing", cal["reason"].get<std::string>())};
  }
  if (cal["check"]["due"].get<bool>()) {
    return Refusal{"check_due", fmt::format("check standard {} due after {} units; measure it before testing",
                                            cal["check"]["standard"].get<std::string>(), cal["check"]["every_units"].get<int>())};
  }
  return std::nullopt;
}

std::string Station::next_run_id(double now_s) {
  std::lock_guard lock(mu_);
  ++run_counter_;
  // Globally unique (store/README.md, "Run ids"): time, station name, the store's random instance
  // id (a re-installed station draws a new one) and the store's run counter.
  return fmt::format("{}-{}-{}-{:06}", compact_utc(now_s), config_.station, instance_id_.substr(0, 8), run_counter_);
}

TestOutcome Station::run_test(const TestRequest& request, const CancelToken& cancel, const ProgressFn& progress,
                              Prompter* prompter) {
  const auto t0 = Clock::now();
  const double start_s = unix_now_s();
  std::shared_ptr<const core::Recipe> recipe;
  std::optional<core::CalibrationRecord> cal;
  {
    std::lock_guard lock(mu_);
    recipe = recipe_;
    cal = calibration_;
  }
  core::RunResult run;
  run.run_id = next_run_id(start_s);
  run.serial = request.serial;
  run.lot = request.lot;
  run.station = config_.station;
  run.operator_name = request.operator_name;
  run.recipe = {recipe->name, recipe->version, recipe->content_hash};
  run.decision_rule = core::to_string(recipe->rule);
  run.software = fmt::format("echolined {} ({})", version(), commit());
  run.started_utc = utc_iso8601(start_s);
  run.calibration_id = cal ? cal->id : "";
  run.verdict = core::Verdict::aborted;

  auto history = store_->history(request.serial);
  run.retest = request.retest || (history && !history->empty());

  double begin_ms = 0;   // time begin_run took (0 when the run never got that far)
  auto finish = [&]() {
    run.ended_utc = utc_iso8601(unix_now_s());
    run.timings.total_s = seconds_since(t0);
    run.instruments = instruments_->identities();
    const auto c0 = Clock::now();
    TestOutcome out{run, store_->save_run(run)};
    note_commit(begin_ms + 1000 * seconds_since(c0));
    if (forwarder_) forwarder_->nudge();
    if (!out.stored) spdlog::error("run {} of {} NOT stored: {}", run.run_id, run.serial, out.stored.error().message);
    if (run.verdict != core::Verdict::aborted) {
      std::lock_guard lock(mu_);
      ++units_since_check_;
      if (calibration_) {
        ++calibration_->units_since;
        (void)store_->set_calibration_units(calibration_->id, calibration_->units_since, units_since_check_);
      }
    }
    spdlog::info("run {} serial {}: {}{}{}", run.run_id, run.serial, core::to_string(run.verdict),
                 run.reason.empty() ? "" : " - ", run.reason);
    return out;
  };

  if (!cal) {
    run.reason = "no calibration";
    return finish();
  }
  if (Status s = instruments_->ensure_ready(); !s) {
    run.reason = fmt::format("{}not ready: {}", core::kInstrumentTroublePrefix, s.error().message);
    return finish();
  }
  if (auto* sw = instruments_->switch_()) {
    if (Status s = sw->select("DUT"); !s) {
      instruments_->invalidate(s.error().message);
      run.reason = aborted_reason(s.error());
      return finish();
    }
  }
  // Write-ahead: the run is on record (as in progress) before the source's RF goes on, so a
  // daemon killed mid-sweep leaves a run that the next start finalizes as aborted.
  run.instruments = instruments_->identities();
  const auto b0 = Clock::now();
  Status begun = store_->begin_run(run);
  begin_ms = 1000 * seconds_since(b0);
  if (Status s = begun; !s) {
    run.reason = fmt::format("RF not switched on: the run store did not record the start of the run: {}",
                             s.error().message);
    return finish();
  }
  // The offset pair reads the unit twice: progress counts both sweeps as one.
  const bool pair = recipe->offset_pair;
  const auto sweep_progress = [&](int offset_points) -> ProgressFn {
    if (!pair || !progress) return progress;
    return [&progress, offset_points](int i, int n) { progress(offset_points + i, 2 * n); };
  };
  SweepOutcome sweep = run_sweep(*instruments_, *recipe, config_.fixture, cancel.flag(), sweep_progress(0));
  run.timings.sweep_s = sweep.sweep_s;
  std::vector<core::Reading> offset;
  if (pair && sweep.completed()) {
    // The second reading: the same unit through the kit's offset line (MEASUREMENT.md §12), on
    // the switch's arm, or fitted by the operator when asked (the source's output is off between
    // sweeps, so nothing radiates while the unit is handled).
    auto* sw = instruments_->switch_();
    const bool by_arm = sw && sw->profile().positions.count(core::kOffsetArm) > 0;
    Status s;
    if (by_arm) {
      s = sw->select(core::kOffsetArm);
      if (!s) instruments_->invalidate(s.error().message);
    } else if (!prompter) {
      s = make_error(ErrorKind::config, "the offset pair without a DUT-OFFSET switch arm needs an operator to fit the "
                                        "line, and this test was started without one");
    } else if (!prompter->wait_connected(core::kOffsetArm)) {
      const std::string why = cancel.reason();
      s = make_error(ErrorKind::cancelled, why.empty() ? "cancelled" : why);
    } else if (cancel.cancelled()) {
      s = make_error(ErrorKind::cancelled, cancel.reason());
    } else {
      s = instruments_->ensure_ready();
    }
    if (!s) {
      run.reason = s.error().kind == ErrorKind::cancelled
                       ? fmt::format("second reading not taken: {}", s.error().message)
                       : aborted_reason(s.error());
      run.points = unjudged_points(sweep.readings, {});
      return finish();
    }
    const int n = static_cast<int>(sweep.readings.size());
    SweepOutcome second = run_sweep(*instruments_, *recipe, config_.fixture, cancel.flag(), sweep_progress(n));
    run.timings.sweep_s += second.sweep_s;
    offset = std::move(second.readings);
    if (!second.completed()) {
      sweep.error = second.error->with_context(by_arm ? "sweep on the DUT-OFFSET arm" : "sweep through the offset line");
    }
  }
  if (!sweep.completed()) {
    if (sweep.error->kind == ErrorKind::cancelled) {
      std::string why = cancel.reason();
      run.reason = why.empty() ? sweep.error->message : fmt::format("{} ({})", why, sweep.error->message);
    } else {
      instruments_->invalidate(sweep.error->message);
      run.reason = aborted_reason(*sweep.error);
    }
    run.points = unjudged_points(sweep.readings, offset);
    return finish();
  }
  const auto ta = Clock::now();
  core::Judgement j = core::judge(*recipe, *cal, sweep.readings, {}, offset);
  run.timings.analysis_s = seconds_since(ta);
  run.points = std::move(j.points);
  if (run.points.empty()) run.points = unjudged_points(sweep.readings, offset);
  run.metrics = j.metrics;
  run.verdict = j.verdict;
  run.failure_class = j.failure_class;
  run.reason = j.reason;
  run.trim = j.trim;
  return finish();
}

Result<std::vector<core::Reading>> Station::sweep_standard(const std::string& standard, const core::Recipe& recipe,
                                                           Prompter& prompter, const CancelToken& cancel,
                                                           const StandardProgressFn& progress, bool connect) {
  if (!connect) {
    // A repeat sweep of the standard already connected (reading noise): no switch, no prompt.
  } else if (auto* sw = instruments_->switch_()) {
    // Bring the instruments up first: a switch left closed by an earlier error would otherwise
    // report only "not connected", hiding why (the connection refused, the host unreachable).
    if (Status s = instruments_->ensure_ready(); !s) return s.error();
    if (Status s = sw->select(standard); !s) return s.error();
  } else if (!prompter.wait_connected(standard)) {
    std::string why = cancel.reason();
    return make_error(ErrorKind::cancelled, why.empty() ? "cancelled" : why);
  }
  if (cancel.cancelled()) return make_error(ErrorKind::cancelled, cancel.reason());
  if (Status s = instruments_->ensure_ready(); !s) return s.error();
  SweepOutcome sweep = run_sweep(*instruments_, recipe, config_.fixture, cancel.flag(), [&](int i, int n) {
    if (progress) progress(standard, i, n);
  });
  if (!sweep.completed()) {
    if (sweep.error->kind != ErrorKind::cancelled) instruments_->invalidate(sweep.error->message);
    std::string why = cancel.reason();
    Error e = *sweep.error;
    if (e.kind == ErrorKind::cancelled && !why.empty()) e.message = fmt::format("{} ({})", why, e.message);
    return e.with_context(fmt::format("measuring {}", standard));
  }
  return std::move(sweep.readings);
}

CalibrationOutcome Station::run_calibration(Prompter& prompter, const CancelToken& cancel,
                                            const StandardProgressFn& progress) {
  CalibrationOutcome out;
  auto recipe = this->recipe();
  std::map<std::string, std::vector<core::Reading>> traces;
  for (const auto& standard : standards()) {
    auto r = sweep_standard(standard, *recipe, prompter, cancel, progress);
    if (!r) {
      out.error = r.error().with_context("calibration");
      return out;
    }
    traces[standard] = std::move(r.value());
    if (standard == "OPEN" || standard == "LOAD") {
      // Sweep it again without touching the connection: the difference of the two sweeps
      // measures the reading noise at the full-reflection and at the lowest level (uncertainty.hpp).
      auto again = sweep_standard(standard, *recipe, prompter, cancel, progress, false);
      if (!again) {
        out.error = again.error().with_context("calibration (repeat sweep)");
        return out;
      }
      traces[standard + "/repeat"] = std::move(again.value());
    }
  }
  const double now = unix_now_s();
  std::string id = fmt::format("cal-{}-{}-{}-{}", compact_utc(now), config_.station, instance_id_.substr(0, 8), random_hex4());
  core::CalibrationRecord rec = core::build_calibration(*recipe, traces, capability(*recipe), id, utc_iso8601(now));
  rec.station = config_.station;
  rec.instruments = instruments_->identities();
  rec.recipe = {recipe->name, recipe->version, recipe->content_hash};
  rec.units_since = 0;
  rec.software = fmt::format("echolined {} ({})", version(), commit());
  if (Status s = store_->save_calibration(rec); !s) {
    out.error = s.error().with_context("calibration: store");
    return out;
  }
  if (rec.valid) {
    std::lock_guard lock(mu_);
    calibration_ = rec;
    calibration_created_s_ = now;
    units_since_check_ = 0;
    check_failure_.clear();
  } else {
    // The bench no longer calibrates cleanly, so an older calibration no longer describes it:
    // no unit is judged until a calibration comes out valid. A restart reads the same from the
    // store (the newest calibration is this one), so the two never disagree.
    std::lock_guard lock(mu_);
    check_failure_ = not_valid_text(rec);
  }
  spdlog::info("calibration {}: {} (min directivity {:.1f} dB, {} warnings)", rec.id, rec.valid ? "valid" : "NOT valid",
               rec.min_directivity_db, rec.warnings.size());
  out.record = std::move(rec);
  return out;
}

CheckOutcome Station::run_check(Prompter& prompter, const CancelToken& cancel, const StandardProgressFn& progress) {
  CheckOutcome out;
  auto recipe = this->recipe();
  std::optional<core::CalibrationRecord> cal;
  {
    std::lock_guard lock(mu_);
    cal = calibration_;
  }
  if (!cal) {
    out.error = make_error(ErrorKind::invalid_argument, "check standard: no calibration to compare with; calibrate first");
    return out;
  }
  const std::string standard = recipe->calibration.check_standard;
  auto r = sweep_standard(standard, *recipe, prompter, cancel, progress);
  if (!r) {
    out.error = r.error().with_context("check standard");
    return out;
  }
  std::string why;
  out.drifted = core::check_standard_drifted(*cal, standard, *r, recipe->calibration.check_drift_limit_db, &why);
  out.message = out.drifted ? why : fmt::format("check standard {} within {} dB of the calibration", standard,
                                                recipe->calibration.check_drift_limit_db);
  if (out.drifted) {
    // Persist it: after a restart the drifted calibration must not load as valid again.
    const std::string reason = fmt::format("check standard drifted: {}", why);
    if (Status s = store_->invalidate_calibration(cal->id, reason); !s) {
      spdlog::error("calibration {} stays due in memory only: {}", cal->id, s.error().message);
    }
  }
  std::lock_guard lock(mu_);
  units_since_check_ = 0;
  if (calibration_ && calibration_->id == cal->id) {
    if (Status s = store_->set_calibration_units(cal->id, calibration_->units_since, 0); !s) {
      spdlog::error("check-standard count of calibration {} not stored: {}", cal->id, s.error().message);
    }
  }
  if (out.drifted) check_failure_ = fmt::format("check standard drifted: {}", why);
  return out;
}

Result<json> Station::select_recipe(const std::filesystem::path& path) {
  auto loaded = std::make_shared<core::Recipe>(core::load_recipe(path));
  auto findings = core::check_recipe(*loaded, capability(*loaded));
  json out = {{"recipe", recipe_json(*loaded)}, {"findings", findings_json(findings)}};
  if (core::has_errors(findings)) {
    for (const auto& f : findings) {
      if (f.severity == "error") {
        return make_error(ErrorKind::config, fmt::format("recipe {} refused on this station: {}: {}", path.string(), f.key, f.message));
      }
    }
  }
  if (Status s = store_->save_recipe_text(loaded->content_hash, loaded->name, loaded->version, loaded->source_text); !s) {
    spdlog::error("recipe text not kept for offline re-judging: {}", s.error().message);
  }
  std::lock_guard lock(mu_);
  recipe_ = loaded;
  spdlog::info("recipe selected: {} {} ({})", loaded->name, loaded->version, path.string());
  return out;
}

}  // namespace echoline::service
