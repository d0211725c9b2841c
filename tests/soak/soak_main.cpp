// echoline-soak: reliability runs of a whole station on loopback (echoline-sim + echolined).
//   --mode faults   a lot under injected instrument faults (no reply, dropped link, garbled
//                   reply, spurious error-queue entries, slow replies); counts and audits.
//   --mode crash    SIGKILLs the daemon at random moments during a lot, restarts it, audits
//                   the store after each restart, and checks the operator console's behaviour.
//   --mode loss     the source disappears mid-run (dropped link on every reply), must show as
//                   unhealthy and abort the run; testing resumes when it is back.
// Exit 0 when every invariant held, 1 when one broke, 2 for a bad command line or set-up.
#include <algorithm>
#include <charconv>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <functional>
#include <limits>
#include <random>
#include <string>
#include <thread>

#include <fmt/format.h>

#include "tests/soak/lot_runner.hpp"
#include "tests/soak/station_under_test.hpp"
#include "tests/soak/store_audit.hpp"
#include "drivers/whole_number.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::soak;
using nlohmann::json;
using Clock = std::chrono::steady_clock;

constexpr const char* kUsage = R"(usage: echoline-soak [--mode faults|crash|loss] [options]
  --units N          units to test, 2 to 1000000 (default 150)
  --kills K          crash mode: daemon SIGKILLs during the lot, 0 to 100000 (default 5)
  --fault-scale S    faults mode, 0 to 100: multiply the per-unit fault rates (default 1: about 1 % of
                     units meet a no-reply, 0.5 % a dropped link, 0.5 % a garbled reply,
                     0.5 % a spurious error entry, 2 % a slow reply)
  --seed N           seeds faults and kill moments (default 1)
  --keep DIR         work in DIR and keep it (store, logs, configs); default: a temp folder
)";

struct Options {
  std::string mode = "faults";
  int units = 150;
  int kills = 5;
  double fault_scale = 1;
  std::uint64_t seed = 1;
  std::string keep;
};

[[noreturn]] void usage(const std::string& message) {
  std::fprintf(stderr, "echoline-soak: %s\n%s", message.c_str(), kUsage);
  std::exit(2);
}

Options parse(int argc, char** argv) {
  Options o;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&]() -> std::string {
      if (i + 1 >= argc) usage(a + " needs a value");
      return argv[++i];
    };
    // A whole number in [min, max], or a usage error naming the option and the range.
    auto whole = [&](long long min, long long max) {
      const std::string v = value();
      const auto n = drivers::parse_whole_number(v, min, max);
      if (!n) usage(drivers::whole_number_error(a, v, min, max));
      return *n;
    };
    if (a == "--mode") o.mode = value();
    else if (a == "--units") o.units = static_cast<int>(whole(2, 1000000));
    else if (a == "--kills") o.kills = static_cast<int>(whole(0, 100000));
    else if (a == "--fault-scale") {
      const std::string v = value();
      double scale = -1;
      const auto [end, ec] = std::from_chars(v.data(), v.data() + v.size(), scale);
      if (v.empty() || ec != std::errc() || end != v.data() + v.size() || !(scale >= 0 && scale <= 100)) {
        usage(a + " " + v + ": expected a number from 0 to 100");
      }
      o.fault_scale = scale;
    } else if (a == "--seed") o.seed = static_cast<std::uint64_t>(whole(0, std::numeric_limits<long long>::max()));
    else if (a == "--keep") o.keep = value();
    else if (a == "--help" || a == "-h") {
      std::fputs(kUsage, stdout);
      std::exit(0);
    } else usage("unknown option " + a);
  }
  if (o.mode != "faults" && o.mode != "crash" && o.mode != "loss") usage("--mode must be faults, crash or loss");
  return o;
}

double seconds_since(Clock::time_point t0) { return std::chrono::duration<double>(Clock::now() - t0).count(); }

void print_counters(const LotCounters& c) {
  std::printf("units_tested=%d\nresults=%d\naborted_runs=%d\nretries=%d\nunits_never_judged=%d\nlost_links=%d\n",
              c.units_tested, c.results, c.aborted, c.retries, c.units_never_judged, c.lost_links);
  std::printf("calibrations=%d calibration_failures=%d checks=%d check_failures=%d\n", c.calibrations,
              c.calibration_failures, c.checks, c.check_failures);
  for (const auto& [v, n] : c.verdicts) std::printf("final_%s=%d\n", v.c_str(), n);
}

// Prints the audit; returns the number of broken invariants.
int print_audit(const AuditResult& a, const char* when) {
  std::printf("[%s] store_integrity=%s runs_stored=%d stored_aborted=%d judged=%d incomplete_judged=%d "
              "partial_passes=%d truth_scored=%d misattributed=%d false_passes=%d worst_misfit_db=%.2f %s\n",
              when, a.integrity.c_str(), a.stored, a.stored_aborted, a.judged, a.incomplete_judged, a.partial_passes,
              a.truth_scored, a.misattributed, a.false_passes, a.worst_misfit_db, a.worst_misfit_run.c_str());
  for (std::size_t i = 0; i < a.problems.size() && i < 20; ++i) std::printf("  problem: %s\n", a.problems[i].c_str());
  return a.clean() ? 0 : 1;
}

int check(bool ok, const std::string& what) {
  std::printf("%s: %s\n", ok ? "ok  " : "FAIL", what.c_str());
  return ok ? 0 : 1;
}

json instrument_health(StationUnderTest& st, const std::string& role) {
  const json status = st.status();
  for (const auto& i : status["instruments"]) {
    if (i.value("role", "") == role) return i;
  }
  return json::object();
}

// ---- faults ----
int run_faults(StationUnderTest& st, const Options& o) {
  LotCounters c;
  LotRunner runner(st, c);
  const auto serials = st.units();
  const int pid = st.daemon_pid();
  const long rss_start = resident_kb(pid);
  int broken = 0;
  if (!runner.calibrate()) return 1 + check(false, "initial calibration");
  runner.measure_unit_traffic(serials[0]);
  FaultPlan plan;
  plan.scale = o.fault_scale;
  plan.seed = o.seed;
  if (plan.scale > 0) runner.arm_faults(plan);
  const auto t0 = Clock::now();
  for (int i = 1; i < o.units && i < static_cast<int>(serials.size()); ++i) {
    runner.test(serials[i]);
    if (i % 500 == 0) {
      std::printf("progress: %d units, %.0f s, daemon VmRSS %ld kB\n", i, seconds_since(t0), resident_kb(pid));
      std::fflush(stdout);
    }
  }
  const double elapsed = seconds_since(t0);
  st.clear_faults();
  json sim_status = st.control({{"cmd", "status"}});
  const long rss_end = resident_kb(pid);
  const bool same_daemon = st.daemon_running() && st.daemon_pid() == pid;
  const auto api_runs = st.lot_runs();

  std::printf("---- soak (faults) ----\n");
  print_counters(c);
  for (const char* role : {"source", "receiver"}) {
    std::printf("faults_fired_%s=%s\n", role, sim_status["instruments"][role].value("faults_fired", json(0)).dump().c_str());
  }
  std::printf("runs_lot=%zu\ndaemon_restarts=%d\nvmrss_start_kb=%ld\nvmrss_end_kb=%ld\nelapsed_s=%.1f\nunits_per_s=%.2f\n",
              api_runs.size(), same_daemon ? 0 : 1, rss_start, rss_end, elapsed, (c.units_tested - 1) / elapsed);
  AuditOptions ao;
  const AuditResult a = audit_store(st, ao);
  broken += print_audit(a, "end");
  broken += check(same_daemon, "the daemon never restarted (same pid, still running)");
  broken += check(static_cast<int>(api_runs.size()) == c.results, "runs.lot lists every run the daemon reported");
  broken += check(a.stored == c.results, "every reported run is in the store file");
  broken += check(c.lost_links == 0, "no test lost its API link");
  broken += check(c.problems.empty(), "no unexpected refusals");
  for (const auto& p : c.problems) std::printf("  problem: %s\n", p.c_str());
  return broken;
}

// ---- crash ----
// The operator console (echoline station) across a daemon crash: it must tell the operator the
// link is lost and the unit was NOT judged, keep retrying, and come back on its own once the
// daemon runs again. `restart` (start the daemon again) runs between the two halves.
int console_rides_out_crash(StationUnderTest& st, const std::string& serial, const std::function<void()>& restart) {
  testing::ChildProcess::Options po;
  po.pipe_stdin = true;
  po.merge_stderr = true;
  auto console = testing::ChildProcess::start(
      {testing::client_binary().string(), "station", "--socket", st.daemon_unix_socket(), "--lot", st.lot_name(),
       "--no-color"},
      po);
  // The scan prompt has no newline: wait for the first screen, then for the output to settle.
  const bool first_screen = console.wait_for_line("ECHOLINE STATION", std::chrono::seconds(30)).has_value();
  while (console.read_line(std::chrono::milliseconds(1500))) {
  }
  int broken = check(first_screen && console.running(), "console showed its first screen and waits for a scan");
  st.kill_daemon();
  // The serial, then Enter for "connect the unit" (an operator presses it once the unit is on).
  console.write_stdin(serial + "\n\n");
  const bool said_lost = console.wait_for_line("NOT judged", std::chrono::seconds(30)).has_value();
  broken += check(said_lost, "console told the operator the link was lost and the unit in the fixture was NOT judged");
  restart();
  const bool back = console.wait_for_line("station service back", std::chrono::seconds(60)).has_value();
  broken += check(back, "console reconnected on its own once the daemon ran again");
  console.close_stdin();
  auto code = console.wait(std::chrono::seconds(30));
  broken += check(code.has_value(), fmt::format("console ended at the end of its input (exit {})",
                                                code ? std::to_string(*code) : "none: still running"));
  if (!said_lost || !back) {
    const auto& t = console.output_lines();
    for (std::size_t i = t.size() > 12 ? t.size() - 12 : 0; i < t.size(); ++i) std::printf("  console: %s\n", t[i].c_str());
  }
  if (console.running()) console.kill_now();
  return broken;
}

int run_crash(StationUnderTest& st, const Options& o) {
  LotCounters c;
  LotRunner runner(st, c);
  const auto serials = st.units();
  int broken = 0;
  if (!runner.calibrate()) return 1 + check(false, "initial calibration");
  std::mt19937_64 rng(o.seed);
  std::vector<int> kill_units;
  for (int k = 0; k < o.kills; ++k) kill_units.push_back((k + 1) * o.units / (o.kills + 1));
  const auto t0 = Clock::now();
  int restarts = 0;
  double unit_s = 0.5;   // the last undisturbed unit's test time, for drawing kill moments
  for (int i = 0; i < o.units && i < static_cast<int>(serials.size()); ++i) {
    const bool kill_here = std::find(kill_units.begin(), kill_units.end(), i) != kill_units.end();
    if (!kill_here) {
      const auto tu = Clock::now();
      if (!runner.test(serials[i]).empty()) unit_s = seconds_since(tu);
      continue;
    }
    // A random moment over 110 % of a unit's test time: mostly during the sweep, sometimes just
    // after the result (the run's transaction has committed).
    const double after_s = std::uniform_real_distribution<double>(0.0, 1.1 * unit_s)(rng);
    std::string verdict = runner.test(serials[i], after_s);
    const std::string when = verdict.empty() ? fmt::format("{:.0f} ms after test.start", 1e3 * after_s)
                                             : "after its result (" + verdict + ")";
    auto restart = [&] {
      ++restarts;
      std::printf("kill %d: unit %s at %s\n", restarts, serials[i].c_str(), when.c_str());
      // SAFETY: a killed daemon cannot switch the source off; whatever it left stays on the
      // antenna until something does. The service manager runs `echolined --rf-off` after any
      // stop (ExecStopPost in config/echolined.service); this does the same and checks it.
      const std::string left_on = st.query_source("OUTP?");
      std::printf("kill %d: source output after SIGKILL: %s\n", restarts, left_on.c_str());
      std::string rf_text;
      const int rf_code = st.rf_off(&rf_text);
      const std::string off = st.query_source("OUTP?");
      broken += check(rf_code == 0 && (off == "0" || off == "OFF"),
                      fmt::format("echolined --rf-off switched the source off after the crash (exit {}, OUTP? {}): {}", rf_code,
                                  off, rf_text.substr(0, rf_text.find('\n'))));
      const auto tr = Clock::now();
      st.start_daemon();
      std::printf("restart %d: daemon listening again after %.2f s\n", restarts, seconds_since(tr));
    };
    if (restarts == 0) {
      broken += console_rides_out_crash(st, serials[i], restart);
    } else {
      st.kill_daemon();
      restart();
    }
    const std::string after = st.query_source("OUTP?");
    broken += check(after == "0" || after == "OFF", "the restarted daemon left the source output OFF (OUTP? " + after + ")");
    broken += print_audit(audit_store(st, AuditOptions{}), fmt::format("after kill {}", restarts).c_str());
    json status = st.status();
    broken += check(status["calibration"].value("present", false), "the calibration survived the crash");
    if (status["calibration"].value("due", true)) runner.calibrate();
    // The killed unit is tested again (a retest), as an operator would.
    ++c.retries;
    runner.test(serials[i]);
  }
  const double elapsed = seconds_since(t0);
  std::printf("---- crash ----\n");
  print_counters(c);
  std::printf("kills=%d\nelapsed_s=%.1f\n", restarts, elapsed);
  const AuditResult a = audit_store(st, AuditOptions{});
  broken += print_audit(a, "end");
  // Every tested unit has at least one stored run (complete, or stored as aborted).
  std::map<std::string, int> per_serial;
  for (const auto& r : st.stored_runs(false)) ++per_serial[r.serial];
  int missing = 0;
  for (const auto& s : runner.tested_serials()) missing += per_serial[s] == 0;
  broken += check(missing == 0, fmt::format("every tested unit has a stored run ({} missing)", missing));
  broken += check(c.lost_links == 0, "no test lost its API link outside the kills");
  for (const auto& p : c.problems) std::printf("  problem: %s\n", p.c_str());
  return broken;
}

// ---- instrument loss ----
int run_loss(StationUnderTest& st, const Options& o) {
  LotCounters c;
  LotRunner runner(st, c);
  const auto serials = st.units();
  int broken = 0;
  const int pid = st.daemon_pid();
  if (!runner.calibrate()) return 1 + check(false, "initial calibration");
  int next = 0;
  for (; next < 3; ++next) runner.test(serials[next]);
  broken += check(instrument_health(st, "source").value("healthy", false), "source healthy before the loss");

  // The source vanishes in the middle of a run: every reply from now on drops the link.
  const std::string victim = serials[next++];
  st.control({{"cmd", "connect"}, {"unit", victim}});
  auto r = st.api().call("test.start", {{"serial", victim}, {"lot", st.lot_name()}, {"operator", "soak"}});
  broken += check(r && r->ok, "test.start accepted");
  const long id = st.api().last_id();
  bool armed = false;
  std::string verdict, reason;
  const auto t_loss = Clock::now();
  for (;;) {
    auto m = st.api().next_message(client::Millis{120000});
    if (!m) {
      broken += check(false, "result of the run in progress: " + m.error().message);
      break;
    }
    const json& j = *m;
    if (!j.contains("event") || j.value("id", json(0)) != json(id)) continue;
    // The first progress event (point 1) comes at once; later ones at most every 40 ms, so arm
    // on the first: the rest of the sweep still lies ahead.
    if (j["event"] == "progress" && !armed && j.value("point", 0) >= 1) {
      st.arm_fault("source", "drop", 1.0, o.seed);
      armed = true;
    }
    if (j["event"] == "result") {
      verdict = j["run"].value("verdict", "");
      reason = j["run"].value("reason", "");
      break;
    }
  }
  std::printf("run in progress when the source vanished: %s (%s), %.2f s\n", verdict.c_str(), reason.c_str(),
              seconds_since(t_loss));
  broken += check(armed, "the source was lost during the sweep (after point 50)");
  broken += check(verdict == "aborted", "the run in progress was aborted");

  // While it is gone: a further test is aborted too, and status shows the source unhealthy.
  UnitOutcome during = st.test_unit(serials[next]);
  json health = instrument_health(st, "source");
  std::printf("while lost: test of %s -> %s (%s); status source healthy=%s last_error=\"%s\"\n", serials[next].c_str(),
              during.verdict.c_str(), during.reason.c_str(), health.value("healthy", json(nullptr)).dump().c_str(),
              health.value("last_error", "").c_str());
  broken += check(during.verdict == "aborted", "a test while the source is gone is aborted, never judged");
  broken += check(!health.value("healthy", true), "status shows the source unhealthy");
  broken += check(!health.value("last_error", "").empty(), "status says what is wrong with the source");

  // It comes back: testing resumes with nothing restarted.
  st.clear_faults();
  const auto t_back = Clock::now();
  std::string resumed = runner.test(serials[next]);
  std::printf("after the source came back: %s -> %s, %.2f s\n", serials[next].c_str(), resumed.c_str(),
              seconds_since(t_back));
  ++next;
  broken += check(!resumed.empty() && resumed != "aborted", "testing resumed once the source was back");
  for (int k = 0; k < 3; ++k, ++next) {
    std::string v = runner.test(serials[next]);
    broken += check(!v.empty() && v != "aborted", fmt::format("unit {} judged after the recovery ({})", serials[next], v));
  }
  broken += check(instrument_health(st, "source").value("healthy", false), "status shows the source healthy again");
  broken += check(st.daemon_running() && st.daemon_pid() == pid, "the daemon kept running (same pid)");
  broken += print_audit(audit_store(st, AuditOptions{}), "end");
  print_counters(c);
  return broken;
}

}  // namespace

int main(int argc, char** argv) {
  const Options o = parse(argc, argv);
  std::setvbuf(stdout, nullptr, _IOLBF, 0);
  try {
    std::optional<testing::TempDir> temp;
    std::filesystem::path dir;
    if (o.keep.empty()) {
      temp.emplace("echoline-soak");
      dir = temp->path();
    } else {
      dir = std::filesystem::absolute(o.keep);
      std::filesystem::create_directories(dir);
    }
    StationSetup setup;
    setup.work_dir = dir;
    setup.lot_size = std::max(o.units + 10, 240);
    StationUnderTest st(setup);
    const auto t0 = Clock::now();
    st.start_simulator();
    st.start_daemon();
    std::printf("mode=%s units=%d work_dir=%s start_s=%.2f\n", o.mode.c_str(), o.units, dir.c_str(), seconds_since(t0));
    int broken = 0;
    if (o.mode == "faults") broken = run_faults(st, o);
    if (o.mode == "crash") broken = run_crash(st, o);
    if (o.mode == "loss") broken = run_loss(st, o);
    const int stop_code = st.stop_daemon();
    broken += check(stop_code == 0, fmt::format("the daemon stopped cleanly on SIGTERM (exit {})", stop_code));
    std::printf("total_s=%.1f\nresult=%s (%d broken invariants)\n", seconds_since(t0), broken == 0 ? "PASS" : "FAIL", broken);
    if (broken != 0 && o.keep.empty()) std::printf("logs were in %s (removed; use --keep DIR to keep them)\n", dir.c_str());
    return broken == 0 ? 0 : 1;
  } catch (const std::exception& e) {
    std::fprintf(stderr, "echoline-soak: %s\n", e.what());
    std::printf("result=FAIL (set-up or harness error: %s)\n", e.what());
    return 2;
  }
}
