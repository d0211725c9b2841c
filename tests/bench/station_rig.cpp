// Benchmark rig: starts echoline-sim and echolined as real processes and drives them over their
// real interfaces (fixture control port, daemon JSON-lines API).
#include "tests/bench/station_rig.hpp"

#include <chrono>
#include <fstream>
#include <regex>
#include <sstream>
#include <stdexcept>

#include <fmt/format.h>

namespace echoline::bench {
namespace {

using Clock = std::chrono::steady_clock;
using namespace std::chrono_literals;

std::string read_text(const std::filesystem::path& file) {
  std::ifstream in(file);
  if (!in) throw std::runtime_error(fmt::format("{}: cannot read", file.string()));
  std::stringstream ss;
  ss << in.rdbuf();
  return ss.str();
}

void write_text(const std::filesystem::path& file, const std::string& text) {
  std::ofstream out(file);
  out << text;
  if (!out) throw std::runtime_error(fmt::format("{}: cannot write", file.string()));
}

template <class T>
T value_or_throw(Result<T> r, const std::string& what) {
  if (!r) throw std::runtime_error(fmt::format("{}: {}", what, r.error().message));
  return std::move(*r);
}

}  // namespace

SimProcess::SimProcess(const std::filesystem::path& work_dir, const std::string& config_name, const std::string& profile)
    : child_([&] {
        const auto src = testing::source_dir() / "config/sim" / config_name;
        nlohmann::json cfg = nlohmann::json::parse(read_text(src), nullptr, true, true);
        // Free ports instead of the fixed ones, so parallel runs never collide.
        cfg["control"]["tcp"]["port"] = 0;
        for (auto& [role, inst] : cfg["instruments"].items()) {
          if (inst.contains("endpoints") && inst["endpoints"].contains("tcp")) inst["endpoints"]["tcp"]["port"] = 0;
        }
        const auto lot = (src.parent_path() / cfg.value("lot", std::string("lots/whip915-lot-a.jsonc"))).lexically_normal();
        cfg.erase("lot");
        const auto file = work_dir / fmt::format("sim-{}.json", profile);
        write_text(file, cfg.dump(2));
        return testing::ChildProcess::start({testing::sim_binary().string(), "--config", file.string(), "--lot", lot.string(),
                                             "--profile", profile, "--log-file", (work_dir / fmt::format("sim-{}.log", profile)).string(),
                                             "--log-level", "warn"});
      }()) {
  for (;;) {
    auto line = child_.read_line(20s);
    if (!line) throw std::runtime_error("echoline-sim did not print `ready` within 20 s");
    if (*line == "ready") break;
    if (line->rfind("endpoint ", 0) != 0) continue;
    auto f = testing::parse_fields(*line);
    if (f["role"] == "source" && f["transport"] == "tcp") source_ = f["address"];
    if (f["role"] == "receiver" && f["transport"] == "tcp") receiver_ = f["address"];
    if (f["role"] == "control") control_ = f["address"];
  }
  if (source_.empty() || receiver_.empty() || control_.empty())
    throw std::runtime_error("echoline-sim: missing source, receiver or control endpoint");
  control_link_ = value_or_throw(client::LineConnection::connect_address(control_, client::Millis{5000}), "sim control port");
}

SimProcess::~SimProcess() {
  control_link_.reset();
  child_.terminate(5s);
}

nlohmann::json SimProcess::control(const nlohmann::json& request) {
  // One connection per request: the control port may close idle connections.
  control_link_ = value_or_throw(client::LineConnection::connect_address(control_, client::Millis{5000}), "sim control port");
  if (Status s = control_link_->write_line(request.dump()); !s) throw std::runtime_error("sim control: " + s.error().message);
  const std::string line = value_or_throw(control_link_->read_line(client::Millis{10000}), "sim control reply");
  nlohmann::json reply = nlohmann::json::parse(line);
  if (!reply.value("ok", false)) throw std::runtime_error(fmt::format("sim control: {} -> {}", request.dump(), line));
  return reply;
}

std::vector<std::string> SimProcess::units() { return control({{"cmd", "units"}})["units"].get<std::vector<std::string>>(); }

std::filesystem::path write_recipe(const std::filesystem::path& base, const std::filesystem::path& out, double settle_s,
                                   int points) {
  nlohmann::json r = nlohmann::json::parse(read_text(base), nullptr, true, true);
  if (settle_s >= 0) r["source"]["settle_s"] = settle_s;
  if (points > 0) r["segments"][0]["points"] = points;
  r["calibration"]["max_units"] = 1000000;
  r["calibration"]["check_every_units"] = 0;
  write_text(out, r.dump(2));
  return out;
}

DaemonProcess::DaemonProcess(const std::filesystem::path& work_dir, SimProcess& sim, const std::filesystem::path& recipe,
                             bool start_pulse_cable)
    : sim_(sim), child_([&] {
        static int counter = 0;
        const auto dir = work_dir / fmt::format("daemon-{}", ++counter);
        std::filesystem::create_directories(dir);
        const auto profiles = testing::source_dir() / "config/instruments";
        nlohmann::json station = {
            {"station", "bench-station"},
            {"data_dir", (dir / "data").string()},
            {"log_dir", (dir / "log").string()},
            {"recipe", std::filesystem::absolute(recipe).string()},
            {"instruments",
             {{{"role", "source"}, {"name", "siggen"}, {"address", sim.source_address()}, {"profile", (profiles / "sim-source.jsonc").string()}},
              {{"role", "receiver"}, {"name", "analyzer"}, {"address", sim.receiver_address()}, {"profile", (profiles / "sim-receiver.jsonc").string()}}}},
            {"fixture", {{"coupling_db", 20}, {"mainline_loss_db", 0.5}, {"cable_loss_db", 0.3}, {"source_match_db", 25},
                         {"nominal_directivity_db", 30}, {"start_pulse_cable", start_pulse_cable}}},
            {"api", {{"unix_socket", (dir / "api.sock").string()}, {"tcp_port", 0}}}};
        write_text(dir / "station.json", station.dump(2));
        testing::ChildProcess::Options o;
        o.merge_stderr = true;
        return testing::ChildProcess::start({testing::daemon_binary().string(), "--config", (dir / "station.json").string()}, o);
      }()) {
  auto line = child_.wait_for_line("listening unix=", 30s);
  if (!line) throw std::runtime_error("echolined did not print `listening` within 30 s");
  const auto f = testing::parse_fields(*line);
  auto conn = value_or_throw(client::LineConnection::connect_unix(f.at("unix"), client::Millis{5000}), "daemon API");
  api_ = std::make_unique<client::ApiClient>(std::move(conn));
  auto hello = value_or_throw(api_->hello("operator", "", "echoline bench"), "hello");
  if (!hello.ok) throw std::runtime_error("hello refused: " + hello.message);
}

DaemonProcess::~DaemonProcess() {
  api_.reset();
  child_.terminate(10s);
}

void DaemonProcess::drain_output() {
  while (child_.read_line(std::chrono::milliseconds(0))) {
  }
}

double DaemonProcess::calibrate() {
  const auto t0 = Clock::now();
  auto reply = value_or_throw(api_->call("cal.start", nlohmann::json::object()), "cal.start");
  if (!reply.ok) throw std::runtime_error("cal.start refused: " + reply.message);
  const long id = api_->last_id();
  for (;;) {
    nlohmann::json m = value_or_throw(api_->next_message(client::Millis{120000}), "calibration events");
    drain_output();
    if (m.value("id", -1L) != id || !m.contains("event")) continue;
    const std::string ev = m["event"];
    if (ev == "prompt") {
      const std::string standard = m["standard"];
      sim_.control({{"cmd", "connect"}, {"standard", standard}});
      auto a = value_or_throw(api_->call("cal.answer", {{"standard", standard}}), "cal.answer");
      if (!a.ok) throw std::runtime_error("cal.answer refused: " + a.message);
    } else if (ev == "result") {
      if (!m["calibration"].value("valid", false)) throw std::runtime_error("calibration not valid: " + m.dump());
      return std::chrono::duration<double>(Clock::now() - t0).count();
    } else if (ev == "error") {
      throw std::runtime_error("calibration failed: " + m.dump());
    }
  }
}

UnitTiming DaemonProcess::test_unit(const std::string& sim_unit, const std::string& serial) {
  sim_.control({{"cmd", "connect"}, {"unit", sim_unit}});
  drain_output();
  const auto t0 = Clock::now();
  auto id = value_or_throw(api_->send("test.start", {{"serial", serial}, {"lot", "BENCH"}, {"operator", "bench"}}), "test.start");
  for (;;) {
    nlohmann::json m = value_or_throw(api_->next_message(client::Millis{120000}), "test events");
    if (m.value("id", -1L) != id) continue;
    if (m.contains("ok")) {
      if (!m["ok"].get<bool>()) throw std::runtime_error("test.start refused: " + m.dump());
      continue;
    }
    if (m.value("event", std::string()) != "result") continue;
    UnitTiming t;
    t.seconds = std::chrono::duration<double>(Clock::now() - t0).count();
    t.verdict = m["run"].value("verdict", std::string());
    t.run_id = m["run"].value("run_id", std::string());
    // The run summary (daemon/service/station.cpp run_json) names the count "points_count".
    const nlohmann::json& run = m["run"];
    t.points = run.value("points_count", run.value("point_count", run.contains("points") && run["points"].is_number() ? run["points"].get<int>() : 0));
    if (run.contains("timings")) {
      t.sweep_s = run["timings"].value("sweep_s", 0.0);
      t.run_s = run["timings"].value("total_s", 0.0);
    }
    if (t.verdict == "aborted") throw std::runtime_error("test aborted: " + m["run"].value("reason", std::string()));
    return t;
  }
}

nlohmann::json DaemonProcess::run(const std::string& run_id) {
  auto reply = value_or_throw(api_->call("run.get", {{"run_id", run_id}}), "run.get");
  if (!reply.ok) throw std::runtime_error("run.get refused: " + reply.message);
  return reply.result.at("run");
}

long DaemonProcess::rss_kb() const {
  std::ifstream in(fmt::format("/proc/{}/status", child_.pid()));
  std::string line;
  while (std::getline(in, line)) {
    if (line.rfind("VmRSS:", 0) == 0) return std::stol(line.substr(6));
  }
  throw std::runtime_error("VmRSS not found for the daemon");
}

}  // namespace echoline::bench
