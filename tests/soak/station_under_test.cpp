// The station on loopback for reliability and acceptance runs (station_under_test.hpp).
#include "tests/soak/station_under_test.hpp"

#include <sqlite3.h>

#include <algorithm>
#include <chrono>
#include <cmath>
#include <fstream>
#include <limits>
#include <stdexcept>
#include <thread>

#include <fmt/format.h>

namespace echoline::soak {
namespace {

using nlohmann::json;
using namespace std::chrono_literals;
namespace fs = std::filesystem;

// The machine running the soak may be loaded: start-up waits are generous.
constexpr auto kStartTimeout = 60s;
// Longest silence from the daemon during one test: a run that meets several instrument
// timeouts (2 s each in the sim profiles) and reconnects still reports within this.
constexpr client::Millis kJobSilence{120000};

void write_file(const fs::path& file, const std::string& text) {
  std::ofstream out(file);
  out << text;
  if (!out) throw std::runtime_error(fmt::format("{}: cannot write", file.string()));
}

// Runs `binary args...` with its stderr appended to `stderr_file` (the pid stays the binary's:
// the shell execs it).
testing::ChildProcess start_logged(const fs::path& binary, const std::vector<std::string>& args, const fs::path& stderr_file) {
  std::vector<std::string> argv = {"/bin/sh", "-c", "exec \"$0\" \"$@\" 2>>\"$ECHOLINE_SOAK_STDERR\"", binary.string()};
  argv.insert(argv.end(), args.begin(), args.end());
  testing::ChildProcess::Options o;
  o.env["ECHOLINE_SOAK_STDERR"] = stderr_file.string();
  return testing::ChildProcess::start(std::move(argv), o);
}

struct Db {
  sqlite3* db = nullptr;
  explicit Db(const fs::path& file) {
    if (sqlite3_open_v2(file.c_str(), &db, SQLITE_OPEN_READONLY, nullptr) != SQLITE_OK) {
      std::string msg = db ? sqlite3_errmsg(db) : "out of memory";
      sqlite3_close(db);
      throw std::runtime_error(fmt::format("{}: cannot open: {}", file.string(), msg));
    }
    sqlite3_busy_timeout(db, 10000);
  }
  ~Db() { sqlite3_close(db); }
  Db(const Db&) = delete;
  Db& operator=(const Db&) = delete;
  sqlite3_stmt* prepare(const char* sql) const {
    sqlite3_stmt* st = nullptr;
    if (sqlite3_prepare_v2(db, sql, -1, &st, nullptr) != SQLITE_OK) {
      throw std::runtime_error(fmt::format("store: {}: {}", sql, sqlite3_errmsg(db)));
    }
    return st;
  }
};

double column_or(sqlite3_stmt* st, int col, double when_null) {
  return sqlite3_column_type(st, col) == SQLITE_NULL ? when_null : sqlite3_column_double(st, col);
}

std::string column_text(sqlite3_stmt* st, int col) {
  const auto* p = sqlite3_column_text(st, col);
  return p ? reinterpret_cast<const char*>(p) : "";
}

}  // namespace

long resident_kb(int pid) {
  std::ifstream in(fmt::format("/proc/{}/status", pid));
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmRSS:", 0) == 0) return std::stol(line.substr(6));
  }
  return -1;
}

StationUnderTest::StationUnderTest(StationSetup setup) : setup_(std::move(setup)) {
  fs::create_directories(log_dir());
  if (setup_.lot_file.empty()) write_lot();
}

StationUnderTest::~StationUnderTest() {
  api_.reset();
  control_.reset();
  if (daemon_ && daemon_->running()) daemon_->terminate(10s);
  if (sim_ && sim_->running()) sim_->terminate(5s);
}

void StationUnderTest::write_lot() {
  // The whip915 population (config/sim/lots/whip915-lot-a.jsonc) at a larger count: same
  // spreads and defect fractions, our own serials. Invented data for the simulator.
  json lot = {{"name", "soak-whip915"},
              {"description", "915 MHz whip population for reliability runs"},
              {"count", setup_.lot_size},
              {"serial_pattern", "SOAK915-{:05d}"},
              {"first_number", 1},
              {"seed", setup_.lot_seed},
              {"nominal_length_mm", 78.0},
              {"nominal_f0_hz", 915e6},
              {"length_spread_mm", 1.0},
              {"q", 9.0},
              {"q_spread", 0.05},
              {"resistance_ohm", 45.0},
              {"resistance_spread_ohm", 2.0},
              {"defects",
               {{"open-feed", 0.0042}, {"shorted-feed", 0.0042}, {"too-long", 0.0084}, {"too-short", 0.0084},
                {"lossy", 0.0084}, {"intermittent", 0.0042}}},
              {"too_long_mm", {4.0, 7.0}},
              {"too_short_mm", {4.0, 7.0}},
              {"lossy_extra_ohm", {60.0, 150.0}}};
  write_file(setup_.work_dir / "lot.jsonc", lot.dump(2) + "\n");
}

void StationUnderTest::start_simulator() {
  const fs::path lot = setup_.lot_file.empty() ? setup_.work_dir / "lot.jsonc" : setup_.lot_file;
  sim_.emplace(start_logged(setup_.bench_program,
                            {"--config", setup_.sim_config.string(), "--lot", lot.string(), "--log-file",
                             (log_dir() / "sim.log").string(), "--log-level", "warn"},
                            log_dir() / "sim.stderr"));
  const auto deadline = std::chrono::steady_clock::now() + kStartTimeout;
  for (;;) {
    auto left = std::chrono::duration_cast<std::chrono::milliseconds>(deadline - std::chrono::steady_clock::now());
    auto line = sim_->read_line(std::max(left, std::chrono::milliseconds(1)));
    if (!line) {
      throw std::runtime_error(setup_.bench_program.filename().string() + ": no \"ready\" line (see " +
                               (log_dir() / "sim.stderr").string() + ")");
    }
    if (*line == "ready") break;
    auto f = testing::parse_fields(*line);
    if (f["role"] == "source") source_address_ = f["address"];
    if (f["role"] == "receiver") receiver_address_ = f["address"];
    if (f["role"] == "control") control_address_ = f["address"];
    if (f["role"] == "switch") switch_address_ = f["address"];
  }
  if (source_address_.empty() || receiver_address_.empty() || control_address_.empty()) {
    throw std::runtime_error(setup_.bench_program.filename().string() +
                             ": source, receiver or control endpoint missing from its start-up lines");
  }
}

void StationUnderTest::write_station_config() {
  unix_socket_ = (setup_.work_dir / "api.sock").string();
  // No switch (unless use_switch): the calibration prompts, and the harness connects each
  // standard on the fixture control port as an operator would by hand.
  json station = {
      {"station", setup_.station_name},
      {"data_dir", (setup_.work_dir / "data").string()},
      {"log_dir", log_dir().string()},
      {"recipe", fs::absolute(setup_.recipe).string()},
      {"instruments",
       {{{"role", "source"}, {"name", "siggen"}, {"address", source_address_},
         {"profile", fs::absolute(setup_.source_profile).string()}},
        {{"role", "receiver"}, {"name", "analyzer"}, {"address", receiver_address_},
         {"profile", fs::absolute(setup_.receiver_profile).string()}}}},
      {"calibration_kit", fs::absolute(setup_.calibration_kit).string()},
      {"fixture", setup_.fixture ? *setup_.fixture
                                 : json{{"coupling_db", 20}, {"mainline_loss_db", 0.5}, {"cable_loss_db", 0.3},
                                        {"source_match_db", 25}, {"nominal_directivity_db", setup_.nominal_directivity_db},
                                        {"test_port_delay_ns", 2}}},
      {"api", {{"unix_socket", unix_socket_}}}};
  if (!setup_.central_settings.empty()) station["central"] = setup_.central_settings.string();
  if (setup_.use_switch) {
    if (switch_address_.empty()) throw std::runtime_error("use_switch: the bench program listed no switch endpoint");
    station["instruments"].push_back({{"role", "switch"}, {"name", "calswitch"}, {"address", switch_address_},
                                      {"profile", fs::absolute(setup_.switch_profile).string()}});
  }
  write_file(setup_.work_dir / "station.jsonc", station.dump(2) + "\n");
}

void StationUnderTest::start_daemon() {
  if (!sim_) throw std::runtime_error("start_daemon: start the simulator first");
  if (!fs::exists(station_config_file())) write_station_config();
  api_.reset();
  daemon_.emplace(start_logged(testing::daemon_binary(),
                               {"--config", (setup_.work_dir / "station.jsonc").string(), "--log-level", "warn"},
                               log_dir() / "echolined.stderr"));
  if (!daemon_->wait_for_line("listening", kStartTimeout)) {
    throw std::runtime_error("echolined: no \"listening\" line (see " + (log_dir() / "echolined.stderr").string() + ")");
  }
  connect_api();
}

void StationUnderTest::kill_daemon() {
  api_.reset();
  if (daemon_) daemon_->kill_now();
}

int StationUnderTest::rf_off(std::string* output) {
  testing::ChildProcess::Options po;
  po.merge_stderr = true;
  auto child = testing::ChildProcess::start(
      {testing::daemon_binary().string(), "--config", (setup_.work_dir / "station.jsonc").string(), "--rf-off"}, po);
  std::string text;
  while (auto line = child.read_line(30s)) text += *line + "\n";   // until EOF: the process ended
  auto code = child.wait(5s);
  if (output) *output = text;
  if (!code) {
    child.kill_now();
    return -1;
  }
  return *code;
}

int StationUnderTest::stop_daemon() {
  api_.reset();
  return daemon_ ? daemon_->terminate(30s) : -1;
}

int StationUnderTest::daemon_pid() const { return daemon_ ? daemon_->pid() : -1; }
bool StationUnderTest::daemon_running() { return daemon_ && daemon_->running(); }
std::string StationUnderTest::daemon_unix_socket() const { return unix_socket_; }

void StationUnderTest::connect_api() {
  auto conn = client::LineConnection::connect_unix(unix_socket_, client::Millis{5000});
  if (!conn) throw std::runtime_error("daemon: " + conn.error().message);
  api_ = std::make_unique<client::ApiClient>(std::move(conn.value()));
  auto hello = api_->hello("operator", "", setup_.client_name);
  if (!hello || !hello->ok) {
    throw std::runtime_error("daemon: hello failed: " + (hello ? hello->message : hello.error().message));
  }
}

client::ApiClient& StationUnderTest::api() {
  if (!api_) throw std::runtime_error("daemon: not connected");
  return *api_;
}

json StationUnderTest::status() {
  auto r = api().call("status", json::object());
  if (!r) throw std::runtime_error("status: " + r.error().message);
  if (!r->ok) throw std::runtime_error("status refused: " + r->message);
  return r->result;
}

json StationUnderTest::wait_job_end(long id, std::string* why, double stop_after_s, bool* stopped) {
  using SteadyClock = std::chrono::steady_clock;
  const auto start = SteadyClock::now();
  const auto stop_at = start + std::chrono::duration_cast<SteadyClock::duration>(std::chrono::duration<double>(stop_after_s));
  for (;;) {
    client::Millis wait = kJobSilence;
    if (stop_after_s > 0) {
      const auto left = std::chrono::duration_cast<client::Millis>(stop_at - SteadyClock::now());
      wait = std::clamp(left, client::Millis{0}, kJobSilence);
    }
    auto m = api().next_message(wait);
    if (!m && stop_after_s > 0 && m.error().kind == ErrorKind::timeout && SteadyClock::now() >= stop_at) {
      if (stopped) *stopped = true;
      return nullptr;
    }
    if (!m) {
      if (why) *why = m.error().message;
      return nullptr;
    }
    const json& j = *m;
    if (!j.contains("event") || !j.contains("id") || !j["id"].is_number_integer() || j["id"].get<long>() != id) continue;
    const std::string ev = j["event"].get<std::string>();
    if (ev == "result") return j;
    if (ev == "error") {
      if (why) *why = j["error"].value("message", "error event without message");
      return nullptr;
    }
    if (ev == "prompt") {
      const std::string standard = j.value("standard", "");
      control({{"cmd", "connect"}, {"standard", standard}});
      auto a = api().call("cal.answer", {{"standard", standard}});
      if (!a) {
        if (why) *why = a.error().message;
        return nullptr;
      }
      if (!a->ok) {
        if (why) *why = "cal.answer refused: " + a->message;
        return nullptr;
      }
    }
  }
}

std::optional<json> StationUnderTest::calibrate(std::string* why) {
  auto r = api().call("cal.start", json::object());
  if (!r) {
    if (why) *why = r.error().message;
    return std::nullopt;
  }
  if (!r->ok) {
    if (why) *why = r->code + ": " + r->message;
    return std::nullopt;
  }
  json end = wait_job_end(api().last_id(), why);
  if (end.is_null() || !end.contains("calibration")) return std::nullopt;
  return end["calibration"];
}

bool StationUnderTest::check_standard(std::string* why) {
  auto r = api().call("cal.check", json::object());
  if (!r) {
    if (why) *why = r.error().message;
    return false;
  }
  if (!r->ok) {
    if (why) *why = r->code + ": " + r->message;
    return false;
  }
  json end = wait_job_end(api().last_id(), why);
  if (end.is_null()) return false;
  if (why) *why = end.contains("check") ? end["check"].value("message", "") : "";
  return true;
}

UnitOutcome StationUnderTest::test_unit(const std::string& serial, double stop_after_s) {
  UnitOutcome out;
  control({{"cmd", "connect"}, {"unit", serial}});
  auto r = api().call("test.start", {{"serial", serial}, {"lot", setup_.lot_name}, {"operator", setup_.operator_name}});
  if (!r) {
    out.lost_daemon = true;
    out.reason = r.error().message;
    return out;
  }
  if (!r->ok) {
    out.refusal = r->code;
    out.reason = r->message;
    return out;
  }
  bool stopped = false;
  json end = wait_job_end(api().last_id(), &out.reason, stop_after_s, &stopped);
  if (stopped) return out;
  if (end.is_null()) {
    out.lost_daemon = true;
    return out;
  }
  const json& run = end["run"];
  out.verdict = run.value("verdict", "");
  out.reason = run.value("reason", "");
  out.run_id = run.value("run_id", "");
  return out;
}

std::vector<json> StationUnderTest::lot_runs() {
  auto r = api().call("runs.lot", {{"lot", setup_.lot_name}}, client::Millis{120000});
  if (!r) throw std::runtime_error("runs.lot: " + r.error().message);
  if (!r->ok) {
    if (r->code == "not_found") return {};
    throw std::runtime_error("runs.lot refused: " + r->message);
  }
  return r->result["runs"].get<std::vector<json>>();
}

json StationUnderTest::control(const json& request) {
  for (int attempt = 0; attempt < 2; ++attempt) {
    if (!control_) {
      auto c = client::LineConnection::connect_address(control_address_, client::Millis{5000});
      if (!c) throw std::runtime_error("fixture control: " + c.error().message);
      control_ = std::move(c.value());
    }
    auto line = [&]() -> Result<std::string> {
      if (Status s = control_->write_line(request.dump()); !s) return s.error();
      return control_->read_line(client::Millis{30000});
    }();
    if (!line) {
      control_.reset();   // a fresh connection once, then give up
      if (attempt == 1) throw std::runtime_error("fixture control: " + line.error().message);
      continue;
    }
    json reply = json::parse(*line, nullptr, false);
    if (reply.is_discarded() || !reply.value("ok", false)) {
      throw std::runtime_error(fmt::format("fixture control: {} -> {}", request.dump(), *line));
    }
    return reply;
  }
  throw std::runtime_error("fixture control: unreachable");
}

std::vector<std::string> StationUnderTest::units() { return control({{"cmd", "units"}})["units"].get<std::vector<std::string>>(); }

json StationUnderTest::truth(const std::string& serial, const std::vector<double>& frequencies_hz) {
  return control({{"cmd", "truth"}, {"unit", serial}, {"frequencies_hz", frequencies_hz}});
}

json StationUnderTest::arm_fault(const std::string& role, const std::string& kind, double probability, std::uint64_t seed,
                                 double delay_ms) {
  json req = {{"cmd", "fault"}, {"role", role}, {"kind", kind}, {"probability", probability}, {"seed", seed}};
  if (delay_ms > 0) req["delay_ms"] = delay_ms;
  return control(req);
}

void StationUnderTest::clear_faults() { control({{"cmd", "clear-faults"}}); }

std::string StationUnderTest::query_source(const std::string& query) {
  auto c = client::LineConnection::connect_address(source_address_, client::Millis{5000});
  if (!c) throw std::runtime_error("source: " + c.error().message);
  if (Status s = (*c)->write_line(query); !s) throw std::runtime_error("source: " + s.error().message);
  auto line = (*c)->read_line(client::Millis{5000});
  if (!line) throw std::runtime_error("source: " + query + ": " + line.error().message);
  return *line;
}

fs::path StationUnderTest::store_file() const { return setup_.work_dir / "data" / (setup_.station_name + ".sqlite"); }

std::string StationUnderTest::integrity_check() const {
  Db db(store_file());
  sqlite3_stmt* st = db.prepare("PRAGMA integrity_check");
  std::string out;
  while (sqlite3_step(st) == SQLITE_ROW) {
    if (!out.empty()) out += "; ";
    out += column_text(st, 0);
  }
  sqlite3_finalize(st);
  return out;
}

std::vector<StoredRun> StationUnderTest::stored_runs(bool with_points) const {
  Db db(store_file());
  std::vector<StoredRun> runs;
  sqlite3_stmt* st = db.prepare(
      "SELECT r.run_id, r.serial, r.verdict, r.points_count, "
      "(SELECT count(*) FROM readings g WHERE g.run_id = r.run_id) FROM runs r WHERE r.lot = ?1 ORDER BY r.seq");
  sqlite3_bind_text(st, 1, setup_.lot_name.c_str(), -1, SQLITE_TRANSIENT);
  while (sqlite3_step(st) == SQLITE_ROW) {
    StoredRun r;
    r.run_id = column_text(st, 0);
    r.serial = column_text(st, 1);
    r.verdict = column_text(st, 2);
    r.points_count = sqlite3_column_int(st, 3);
    r.readings = sqlite3_column_int(st, 4);
    runs.push_back(std::move(r));
  }
  sqlite3_finalize(st);
  if (!with_points) return runs;
  const double nan = std::numeric_limits<double>::quiet_NaN();
  const double inf = std::numeric_limits<double>::infinity();
  sqlite3_stmt* pt =
      db.prepare("SELECT frequency_hz, rl_db, rl_worst_db, rl_best_db FROM readings WHERE run_id = ?1 ORDER BY idx");
  for (auto& r : runs) {
    sqlite3_reset(pt);
    sqlite3_bind_text(pt, 1, r.run_id.c_str(), -1, SQLITE_TRANSIENT);
    while (sqlite3_step(pt) == SQLITE_ROW) {
      // A NULL best-case return loss is stored for "+inf" (unbounded), see daemon/store/run_store.cpp.
      r.points.push_back({column_or(pt, 0, nan), column_or(pt, 1, nan), column_or(pt, 2, nan), column_or(pt, 3, inf)});
    }
  }
  sqlite3_finalize(pt);
  return runs;
}

}  // namespace echoline::soak
