// Station timing benchmark. Starts echoline-sim and echolined (real processes, loopback) and
// measures, side by side in one run:
//   - time per point of a 201-point step sweep through the daemon (test.start -> result / points)
//     against the loopback floor (the same SCPI on bare sessions) and against a plain Python
//     script (scripts/plain_sweep.py), on the `instant` latency profile;
//   - the cycle time on the `bench` latency profile against the time the instruments impose
//     (replies x command time + sweeps x sweep time + points x settle), from the sim's counters;
//   - fast capture against the step sweep on the same units of the lot on the `bench` profile:
//     cycle time, return loss where RL < 25 dB, each run's bounds against the other run and
//     against the simulator's true return loss, verdicts, and a second step pass as the control
//     for verdict changes (--fast-units);
//   - the daemon's resident memory after 100, 1000 and 10 000 units (--memory-units).
// Prints progress on stderr and one JSON document (raw samples) on stdout or --json FILE.
// Asserts nothing about time. Single-threaded.
#include <unistd.h>

#include <algorithm>
#include <array>
#include <limits>
#include <map>
#include <optional>
#include <set>
#include <cstdlib>
#include <fstream>
#include <iostream>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include <fmt/format.h>
#include <nlohmann/json.hpp>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/recipe.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "daemon/core/station_capability.hpp"
#include "drivers/profile.hpp"
#include "drivers/scpi_session.hpp"
#include "drivers/transport.hpp"
#include "drivers/whole_number.hpp"
#include "tests/bench/floor_client.hpp"
#include "tests/bench/station_rig.hpp"
#include "tests/support/demo_fixture.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::bench;
using json = nlohmann::json;

constexpr const char* kUsage = R"(usage: bench_station [--quick] [--reps N] [--memory-units N] [--fast-units N] [--json FILE] [--skip PART]
N: --reps 1 to 1000, --memory-units 1 to 1000000, --fast-units 1 to 100000 (default: the whole lot;
10 with --quick).

Times the Echoline step sweep through echolined against the loopback floor and a plain Python
script, the cycle time on the bench latency profile, fast capture against the step sweep on the
same units (speed, return loss, verdicts), and the daemon's memory over many units.
PART: instant, bench, fast, memory (repeatable). Raw samples go to stdout (or FILE) as JSON.
RF note: only the simulator is used here; nothing radiates.
)";

std::string find_python() {
  const char* path = std::getenv("PATH");
  std::string p = path ? path : "/usr/bin:/bin";
  std::size_t start = 0;
  while (start <= p.size()) {
    const auto end = p.find(':', start);
    const std::string dir = p.substr(start, end == std::string::npos ? std::string::npos : end - start);
    const auto candidate = std::filesystem::path(dir.empty() ? "." : dir) / "python3";
    if (::access(candidate.c_str(), X_OK) == 0) return candidate.string();
    if (end == std::string::npos) break;
    start = end + 1;
  }
  throw std::runtime_error("python3 not found on PATH (needed for scripts/plain_sweep.py)");
}

// Runs scripts/plain_sweep.py against the sim; returns seconds for the points.
double run_plain_script(const SimProcess& sim, int points, double settle_s) {
  const auto script = testing::source_dir() / "scripts/plain_sweep.py";
  auto child = testing::ChildProcess::start({find_python(), script.string(), "--source", sim.source_address(), "--receiver",
                                             sim.receiver_address(), "--points", std::to_string(points), "--settle-s",
                                             fmt::format("{}", settle_s)});
  auto line = child.wait_for_line("\"seconds\"", std::chrono::minutes(10));
  const int rc = child.terminate(std::chrono::seconds(10));
  if (!line) throw std::runtime_error(fmt::format("plain_sweep.py printed no result (exit {})", rc));
  return json::parse(*line)["seconds"].get<double>();
}

// Replies the sim has sent so far: {source, receiver}.
std::pair<double, double> replies(SimProcess& sim) {
  json st = sim.control({{"cmd", "status"}});
  return {st["instruments"]["source"]["replies"].get<double>(), st["instruments"]["receiver"]["replies"].get<double>()};
}

// One instant-profile comparison for a recipe variant: daemon, floor (engine's exchanges and
// lean), plain script, interleaved rep by rep so the ratios come from neighbouring samples.
json instant_comparison(const std::filesystem::path& dir, SimProcess& sim, const std::filesystem::path& recipe_file, int reps) {
  const core::Recipe recipe = core::load_recipe(recipe_file);
  const auto plan = core::plan_frequencies(recipe);
  const double n = static_cast<double>(plan.size());
  DaemonProcess daemon(dir, sim, recipe_file);
  const double cal_s = daemon.calibrate();
  FloorClient floor(sim.source_address(), sim.receiver_address());
  const auto units = sim.units();
  json out = {{"recipe", recipe.name}, {"points", plan.size()}, {"settle_s", recipe.source.settle_s}, {"calibration_s", cal_s}};
  (void)daemon.test_unit(units.front(), "WARMUP-0001");   // first run pays one-time costs
  for (int r = 0; r < reps; ++r) {
    const auto t = daemon.test_unit(units[static_cast<std::size_t>(r) % units.size()], fmt::format("SPEED-{:04d}", r + 1));
    if (t.points != static_cast<int>(plan.size())) throw std::runtime_error(fmt::format("run stored {} points, expected {}", t.points, plan.size()));
    const double floor_engine = floor.sweep(plan, recipe.source.settle_s, FloorPlan::engine_exchanges);
    const double floor_lean = floor.sweep(plan, recipe.source.settle_s, FloorPlan::lean);
    const double plain = run_plain_script(sim, static_cast<int>(plan.size()), recipe.source.settle_s);
    out["daemon_ms_per_point"].push_back(1e3 * t.seconds / n);
    out["daemon_sweep_ms_per_point"].push_back(1e3 * t.sweep_s / n);
    out["outside_sweep_ms"].push_back(1e3 * (t.seconds - t.sweep_s));
    out["after_run_ms"].push_back(1e3 * (t.seconds - t.run_s));
    out["floor_ms_per_point"].push_back(1e3 * floor_engine / n);
    out["lean_floor_ms_per_point"].push_back(1e3 * floor_lean / n);
    out["plain_ms_per_point"].push_back(1e3 * plain / n);
    out["ratio_to_floor"].push_back(t.seconds / floor_engine);
    out["ratio_to_lean_floor"].push_back(t.seconds / floor_lean);
    out["speedup_vs_plain"].push_back(plain / t.seconds);
    std::cerr << fmt::format("  rep {}: daemon {:.3f} ms/pt (sweep alone {:.3f}; {:.1f} ms outside the sweep, {:.1f} ms of it after "
                             "judging), floor {:.3f}, lean floor {:.3f}, plain script {:.3f} ({})\n",
                             r + 1, 1e3 * t.seconds / n, 1e3 * t.sweep_s / n, 1e3 * (t.seconds - t.sweep_s),
                             1e3 * (t.seconds - t.run_s), 1e3 * floor_engine / n, 1e3 * floor_lean / n, 1e3 * plain / n, t.verdict);
  }
  return out;
}

json bench_profile(const std::filesystem::path& dir, int points, int reps) {
  SimProcess sim(dir, "bench.jsonc", "bench");
  const auto recipe_file = write_recipe(testing::source_dir() / "config/recipes/whip915.jsonc",
                                        dir / fmt::format("whip915-bench-{}.json", points), -1, points);
  const core::Recipe recipe = core::load_recipe(recipe_file);
  const auto plan = core::plan_frequencies(recipe);
  // The sweep time the receiver models for this recipe's span/RBW/VBW, asked from the receiver.
  double sweep_s = 0, command_s = 0.003, instrument_settle_s = 0;
  {
    auto t = drivers::make_transport(sim.receiver_address(), "probe");
    if (!t) throw std::runtime_error(t.error().message);
    drivers::ScpiSession s("probe", std::move(*t));
    if (Status c = s.connect(); !c) throw std::runtime_error(c.error().message);
    (void)s.write(fmt::format("FREQ:SPAN {};BAND {};BAND:VID {}", recipe.receiver.span_hz, recipe.receiver.rbw_hz,
                              recipe.receiver.vbw_hz > 0 ? recipe.receiver.vbw_hz : recipe.receiver.rbw_hz));
    auto st = s.query_number("SWE:TIME?");
    if (!st) throw std::runtime_error(st.error().message);
    sweep_s = *st;
  }
  {
    json cfg = json::parse(std::ifstream(testing::source_dir() / "config/sim/bench.jsonc"), nullptr, true, true);
    command_s = cfg["latency"].value("command_ms", 3.0) / 1e3;
    // The simulated source's own settling: its *OPC? after a frequency change answers this late.
    instrument_settle_s = cfg["instruments"]["source"]["settings"].value("settle_s", 0.0);
  }
  DaemonProcess daemon(dir, sim, recipe_file);
  const double cal_s = daemon.calibrate();
  const auto units = sim.units();
  const double n = static_cast<double>(plan.size());
  json out = {{"recipe", recipe.name}, {"points", plan.size()}, {"settle_s", recipe.source.settle_s}, {"sweep_time_s", sweep_s},
              {"command_s", command_s}, {"calibration_s", cal_s}};
  for (int r = 0; r < reps; ++r) {
    const auto before = replies(sim);
    const auto t = daemon.test_unit(units[static_cast<std::size_t>(r) % units.size()], fmt::format("CYCLE-{:04d}", r + 1));
    const auto after = replies(sim);
    // Control-port requests are not instrument replies; only the daemon talked to the instruments.
    const double source_replies = after.first - before.first;
    const double receiver_replies = after.second - before.second;
    const double reply_count = source_replies + receiver_replies;
    // What the instruments impose on the engine's critical path. Per point: the receiver's
    // reply to "INIT;*OPC?" (command time + sweep), then the source's reply to "FREQ:CW;*OPC?"
    // (command time + the source's own settling) and the recipe's settle; the marker reply runs
    // meanwhile on the other connection, so one reply per point after the first overlaps.
    const double overlapped = std::min(source_replies, n - 1);
    const double settle_each = instrument_settle_s + recipe.source.settle_s;
    const double imposed = (reply_count - overlapped) * command_s + n * sweep_s + n * settle_each;
    // The issue's reference: settling and sweeping alone, no command time.
    const double physical = n * (sweep_s + settle_each);
    const double plain = run_plain_script(sim, static_cast<int>(plan.size()), recipe.source.settle_s);
    out["cycle_s"].push_back(t.seconds);
    out["replies_per_run"].push_back(reply_count);
    out["overlapped_replies_per_run"].push_back(overlapped);
    out["imposed_s"].push_back(imposed);
    out["settle_sweep_s"].push_back(physical);
    out["overhead_pct"].push_back(100.0 * (t.seconds / imposed - 1.0));
    out["overhead_vs_settle_sweep_pct"].push_back(100.0 * (t.seconds / physical - 1.0));
    out["plain_s"].push_back(plain);
    out["speedup_vs_plain"].push_back(plain / t.seconds);
    std::cerr << fmt::format("  rep {}: cycle {:.3f} s, imposed {:.3f} s ({} replies, {} overlapped), settle+sweep {:.3f} s, plain script {:.3f} s\n",
                             r + 1, t.seconds, imposed, reply_count, overlapped, physical, plain);
  }
  return out;
}

// The points of a stored run: {frequency, RL, RL worst, RL best (+inf when unbounded)}.
struct RunPoints {
  std::vector<std::array<double, 4>> rows;
  std::string reason;   // the verdict's reason
};
RunPoints run_points(DaemonProcess& daemon, const std::string& run_id) {
  const json run = daemon.run(run_id);
  RunPoints out;
  out.reason = run.value("reason", std::string());
  for (const auto& p : run.at("points")) {
    const double best = p.at(4).is_null() ? std::numeric_limits<double>::infinity() : p.at(4).get<double>();
    out.rows.push_back({p.at(0).get<double>(), p.at(2).get<double>(), p.at(3).get<double>(), best});
  }
  return out;
}

// Fast capture on the bench profile against the step sweep, unit by unit on the same simulated
// units of the lot: cycle time (and what the instruments impose: the capture the plan expects
// plus the command time of each reply), return loss where the step sweep reads RL < 25 dB, the
// step run's uncertainty interval, the fast run's interval (against the step reading and against
// the unit's true return loss from the simulator's control port: an interval that misses the
// truth is a budget that does not hold), and the verdict. Step sweeps first, then fast captures,
// then the step sweep again (the control: how many verdicts two step sweeps of the same units
// change), each with its own calibration.
json fast_capture_profile(const std::filesystem::path& dir, int unit_count) {
  SimProcess sim(dir, "bench.jsonc", "bench");
  const auto fast_file = write_recipe(testing::source_dir() / "config/recipes/whip915-fast.jsonc", dir / "whip915-fast-bench.json", -1);
  const auto step_file = write_recipe(testing::source_dir() / "config/recipes/whip915.jsonc", dir / "whip915-step-bench.json", -1);
  const core::Recipe fast = core::load_recipe(fast_file);
  double command_s = 0.003;
  {
    json cfg = json::parse(std::ifstream(testing::source_dir() / "config/sim/bench.jsonc"), nullptr, true, true);
    command_s = cfg["latency"].value("command_ms", 3.0) / 1e3;
  }
  // The plan the daemon makes: the station the rig writes (station_rig.cpp) and the sim profiles.
  const drivers::FixtureConfig fixture = testing::demo_fixture();
  const auto profiles = testing::source_dir() / "config/instruments";
  // With the start-pulse cable (the bench sim config has one) and without.
  drivers::FixtureConfig cabled = fixture;
  cabled.start_pulse_cable = true;
  const drivers::Profile source_profile = drivers::load_profile(profiles / "sim-source.jsonc");
  const drivers::Profile receiver_profile = drivers::load_profile(profiles / "sim-receiver.jsonc");
  auto plan = core::plan_fast_capture(fast, cabled, source_profile, receiver_profile);
  if (!plan) throw std::runtime_error(plan.error().message);
  if (!plan->triggered) throw std::runtime_error("the bench's fast plan is not triggered: " + plan->reason);
  auto untriggered = core::plan_fast_capture(fast, fixture, source_profile, receiver_profile);
  if (!untriggered) throw std::runtime_error(untriggered.error().message);
  const double capture_s = plan->capture_s;
  auto units = sim.units();
  if (unit_count > 0 && static_cast<std::size_t>(unit_count) < units.size()) units.resize(static_cast<std::size_t>(unit_count));
  json out = {{"recipe", fast.name}, {"points", core::plan_frequencies(fast).size()}, {"capture_s", capture_s},
              {"command_s", command_s}, {"units", units.size()},
              {"plan", {{"arrangement", core::to_string(plan->arrangement)}, {"rbw_hz", plan->rbw_hz},
                        {"source_sweep_s", plan->source_sweep_s}, {"receiver_sweep_s", plan->receiver_sweep_s},
                        {"receiver_sweeps", plan->receiver_sweeps}, {"bins", plan->axis.points}, {"reason", plan->reason},
                        {"triggered", plan->triggered}, {"trigger_delay_s", plan->trigger_delay_s},
                        {"frequency_offset_hz", plan->frequency_offset_hz}, {"untriggered_reason", untriggered->reason}}}};
  std::cerr << "  plan: " << plan->reason << "\n";
  const std::vector<double> plan_f = core::plan_frequencies(fast);
  // The units' true return loss at the plan frequencies (no bench errors; +inf where infinite;
  // an intermittent unit's good state).
  std::vector<std::vector<double>> truth;
  for (const auto& u : units) {
    const json t = sim.control({{"cmd", "truth"}, {"unit", u}, {"frequencies_hz", plan_f}});
    std::vector<double> rl;
    for (const auto& v : t.at("return_loss_db")) rl.push_back(v.is_null() ? std::numeric_limits<double>::infinity() : v.get<double>());
    if (rl.size() != plan_f.size()) throw std::runtime_error("truth: " + t.dump());
    truth.push_back(std::move(rl));
  }
  const auto outside = [](const std::array<double, 4>& row, double rl) { return rl < row[2] || rl > row[3]; };
  std::vector<std::string> step_verdicts;
  std::vector<RunPoints> step_points;
  int step_truth_outside = 0;
  {
    DaemonProcess daemon(dir, sim, step_file);
    out["step_calibration_s"] = daemon.calibrate();
    for (std::size_t r = 0; r < units.size(); ++r) {
      const auto t = daemon.test_unit(units[r], fmt::format("STEP-{:04d}", r + 1));
      out["step_cycle_s"].push_back(t.seconds);
      step_verdicts.push_back(t.verdict);
      step_points.push_back(run_points(daemon, t.run_id));
      for (std::size_t i = 0; i < step_points.back().rows.size() && i < truth[r].size(); ++i) {
        step_truth_outside += outside(step_points.back().rows[i], truth[r][i]);
      }
      if ((r + 1) % 20 == 0 || r + 1 == units.size()) std::cerr << fmt::format("  step sweep: {} of {} units\n", r + 1, units.size());
    }
  }
  // One fast pass (its own daemon and calibration): with the start-pulse cable the receiver
  // sweep is triggered at the planned ramp phase, without it the phase is left to chance.
  const auto fast_pass = [&](bool cable, const std::string& serial_prefix, const core::FastCapturePlan& pass_plan, json& o) {
    DaemonProcess daemon(dir, sim, fast_file, cable);
    o["calibration_s"] = daemon.calibrate();
    o["capture_s"] = pass_plan.capture_s;
    o["frequency_offset_hz"] = pass_plan.frequency_offset_hz;
    std::vector<double> diffs;
    int outside_bounds = 0, same_verdict = 0, step_outside_fast = 0, fast_truth_outside = 0, truth_points = 0;
    std::map<std::string, int> pairs;
    for (std::size_t r = 0; r < units.size(); ++r) {
      const auto before = replies(sim);
      const auto t = daemon.test_unit(units[r], fmt::format("{}-{:04d}", serial_prefix, r + 1));
      const auto after = replies(sim);
      const double reply_count = (after.first - before.first) + (after.second - before.second);
      const double imposed = pass_plan.capture_s + reply_count * command_s;
      o["cycle_s"].push_back(t.seconds);
      o["replies_per_run"].push_back(reply_count);
      o["imposed_s"].push_back(imposed);
      o["overhead_pct"].push_back(100.0 * (t.seconds / imposed - 1.0));
      o["overhead_vs_capture_pct"].push_back(100.0 * (t.seconds / pass_plan.capture_s - 1.0));
      o["step_over_fast"].push_back(out["step_cycle_s"][r].get<double>() / t.seconds);
      same_verdict += t.verdict == step_verdicts[r];
      ++pairs[step_verdicts[r] + " -> " + t.verdict];
      if (t.verdict != step_verdicts[r]) {
        o["verdict_changes"].push_back({{"unit", units[r]}, {"step", step_verdicts[r]}, {"fast", t.verdict}});
        std::cerr << fmt::format("  {}: step {}, fast capture {}\n", units[r], step_verdicts[r], t.verdict);
      }
      const RunPoints f = run_points(daemon, t.run_id);
      const RunPoints& st = step_points[r];
      if (f.rows.size() != st.rows.size()) throw std::runtime_error("fast and step runs have different point counts");
      double unit_max = 0;
      int unit_truth_outside = 0, unit_outside_step = 0;
      for (std::size_t i = 0; i < f.rows.size(); ++i) {
        ++truth_points;
        unit_truth_outside += outside(f.rows[i], truth[r][i]);
        if (!(st.rows[i][1] < 25)) continue;
        step_outside_fast += outside(f.rows[i], st.rows[i][1]);
        diffs.push_back(std::abs(f.rows[i][1] - st.rows[i][1]));
        unit_max = std::max(unit_max, diffs.back());
        unit_outside_step += f.rows[i][1] < st.rows[i][2] || f.rows[i][1] > st.rows[i][3];
      }
      outside_bounds += unit_outside_step;
      // Per unit, for the figures over the units that hold still (decided after the control).
      o["rl_unit_max_db"].push_back(unit_max);
      o["rl_unit_outside_step_bounds"].push_back(unit_outside_step);
      // Units whose return loss differs by more than 0.5 dB somewhere, with the step run's reason
      // (an intermittent feed changes between any two sweeps).
      if (unit_max > 0.5) {
        o["rl_units_over_half_db"].push_back({{"unit", units[r]}, {"max_db", unit_max}, {"step_reason", st.reason}});
      }
      fast_truth_outside += unit_truth_outside;
      if (unit_truth_outside > 0) {
        o["fast_truth_outside_units"].push_back({{"unit", units[r]}, {"points", unit_truth_outside}, {"fast_reason", f.reason}});
        std::cerr << fmt::format("  {}: true RL outside the fast run's bounds at {} points ({})\n", units[r], unit_truth_outside, f.reason);
      }
      if ((r + 1) % 20 == 0 || r + 1 == units.size()) {
        std::cerr << fmt::format("  fast capture ({}): {} of {} units, last cycle {:.3f} s (step {:.3f} s), verdicts the same {}\n",
                                 cable ? "triggered" : "untriggered", r + 1, units.size(), t.seconds,
                                 out["step_cycle_s"][r].get<double>(), same_verdict);
      }
    }
    o["truth_points"] = truth_points;
    o["fast_truth_outside_bounds"] = fast_truth_outside;
    o["step_outside_fast_bounds"] = step_outside_fast;
    std::sort(diffs.begin(), diffs.end());
    const auto quantile = [&](double q) { return diffs.empty() ? 0.0 : diffs[static_cast<std::size_t>(q * (diffs.size() - 1))]; };
    o["rl_points_compared"] = diffs.size();
    o["rl_diff_max_db"] = diffs.empty() ? 0.0 : diffs.back();
    o["rl_diff_p99_db"] = quantile(0.99);
    o["rl_diff_median_db"] = quantile(0.5);
    o["rl_points_over_half_db"] = std::count_if(diffs.begin(), diffs.end(), [](double d) { return d > 0.5; });
    o["rl_outside_step_bounds"] = outside_bounds;
    o["verdicts_same"] = same_verdict;
    o["verdict_pairs"] = pairs;
    std::cerr << fmt::format("  fast capture ({}), {} units: verdicts the same {}; RL<25 dB points {}: max |fast - step| {:.3f} dB, "
                             "99th percentile {:.3f} dB, {} over 0.5 dB; {} fast readings outside the step run's bounds, {} step "
                             "readings outside the fast run's; true RL outside the fast bounds at {} of {} points\n",
                             cable ? "triggered" : "untriggered", units.size(), same_verdict, diffs.size(),
                             o["rl_diff_max_db"].get<double>(), o["rl_diff_p99_db"].get<double>(),
                             o["rl_points_over_half_db"].get<long>(), outside_bounds, step_outside_fast, fast_truth_outside,
                             truth_points);
  };
  fast_pass(true, "FAST", *plan, out);
  {
    json u;
    fast_pass(false, "FASTU", *untriggered, u);
    out["untriggered"] = u;
  }
  // The control: the step sweep again, new calibration, same units.
  int repeat_same = 0, repeat_rl_points = 0, repeat_rl_over = 0;
  std::set<std::string> repeat_rl_units;
  {
    DaemonProcess again(dir, sim, step_file);
    (void)again.calibrate();
    for (std::size_t r = 0; r < units.size(); ++r) {
      const auto t = again.test_unit(units[r], fmt::format("STEP2-{:04d}", r + 1));
      repeat_same += t.verdict == step_verdicts[r];
      const RunPoints p2 = run_points(again, t.run_id);
      for (std::size_t i = 0; i < p2.rows.size() && i < step_points[r].rows.size(); ++i) {
        if (!(step_points[r].rows[i][1] < 25)) continue;
        ++repeat_rl_points;
        if (std::abs(p2.rows[i][1] - step_points[r].rows[i][1]) > 0.5) {
          ++repeat_rl_over;
          repeat_rl_units.insert(units[r]);
        }
      }
      if (t.verdict != step_verdicts[r]) {
        out["step_repeat_changes"].push_back({{"unit", units[r]}, {"step", step_verdicts[r]}, {"step_again", t.verdict}});
        std::cerr << fmt::format("  {}: step {}, step again {}\n", units[r], step_verdicts[r], t.verdict);
      }
      if ((r + 1) % 20 == 0 || r + 1 == units.size()) std::cerr << fmt::format("  step sweep again: {} of {} units\n", r + 1, units.size());
    }
  }
  out["step_repeat_verdicts_same"] = repeat_same;
  // The control's return loss: how many RL < 25 dB points two step sweeps put over 0.5 dB apart.
  out["step_repeat_rl_points"] = repeat_rl_points;
  out["step_repeat_rl_over_half_db"] = repeat_rl_over;
  out["step_repeat_rl_units_over_half_db"] = repeat_rl_units;
  out["step_truth_outside_bounds"] = step_truth_outside;
  // The return-loss figures over the units whose two step sweeps agree within 0.5 dB at every
  // RL < 25 dB point (a unit that changes between sweeps, an intermittent feed, cannot agree
  // with any second measurement, the step sweep's own included).
  for (json* o : {&out, &out["untriggered"]}) {
    double steady_max = 0;
    int steady_outside = 0, steady_units = 0;
    for (std::size_t r = 0; r < units.size(); ++r) {
      if (repeat_rl_units.count(units[r]) > 0) continue;
      ++steady_units;
      steady_max = std::max(steady_max, (*o)["rl_unit_max_db"][r].get<double>());
      steady_outside += (*o)["rl_unit_outside_step_bounds"][r].get<int>();
    }
    (*o)["rl_steady_units"] = steady_units;
    (*o)["rl_steady_diff_max_db"] = steady_max;
    (*o)["rl_steady_outside_step_bounds"] = steady_outside;
  }
  std::cerr << fmt::format("  units whose two step sweeps agree ({}): fast max |difference| {:.3f} dB, {} readings outside the step "
                           "interval (free-running: {:.3f} dB, {})\n",
                           out["rl_steady_units"].get<int>(), out["rl_steady_diff_max_db"].get<double>(),
                           out["rl_steady_outside_step_bounds"].get<int>(), out["untriggered"]["rl_steady_diff_max_db"].get<double>(),
                           out["untriggered"]["rl_steady_outside_step_bounds"].get<int>());
  std::cerr << fmt::format("  a second step sweep: verdicts the same {}, RL<25 dB points over 0.5 dB apart {} of {} ({} units); "
                           "true RL outside the step bounds at {} points\n",
                           repeat_same, repeat_rl_over, repeat_rl_points, repeat_rl_units.size(), step_truth_outside);
  return out;
}

json memory_growth(const std::filesystem::path& dir, SimProcess& sim, const std::filesystem::path& recipe_file,
                   const std::vector<int>& checkpoints) {
  DaemonProcess daemon(dir, sim, recipe_file);
  (void)daemon.calibrate();
  const auto units = sim.units();
  json out = {{"checkpoints", json::array()}};
  (void)daemon.test_unit(units.front(), "MEM-WARMUP");
  out["rss_kb_after_calibration"] = daemon.rss_kb();
  int done = 0;
  for (int target : checkpoints) {
    for (; done < target; ++done) {
      (void)daemon.test_unit(units[static_cast<std::size_t>(done) % units.size()], fmt::format("MEM-{:06d}", done + 1));
    }
    const long rss = daemon.rss_kb();
    out["checkpoints"].push_back({{"units", target}, {"rss_kb", rss}});
    std::cerr << fmt::format("  after {} units: VmRSS {} kB\n", target, rss);
  }
  return out;
}

// A command-line mistake (exit 2).
struct UsageError : std::runtime_error {
  using std::runtime_error::runtime_error;
};

long long whole(const std::string& option, const std::string& text, long long min, long long max) {
  const auto n = drivers::parse_whole_number(text, min, max);
  if (!n) throw UsageError(drivers::whole_number_error(option, text, min, max));
  return *n;
}

}  // namespace

int main(int argc, char** argv) try {
  bool quick = false;
  int reps = 0, memory_units = 10000, fast_units = 0;
  std::string json_file;
  std::vector<std::string> skip;
  for (int i = 1; i < argc; ++i) {
    const std::string a = argv[i];
    auto value = [&]() -> std::string {
      if (i + 1 >= argc) throw UsageError(a + " needs a value");
      return argv[++i];
    };
    if (a == "--help" || a == "-h") {
      std::cout << kUsage;
      return 0;
    } else if (a == "--quick") {
      quick = true;
    } else if (a == "--reps") {
      reps = static_cast<int>(whole(a, value(), 1, 1000));
    } else if (a == "--memory-units") {
      memory_units = static_cast<int>(whole(a, value(), 1, 1000000));
    } else if (a == "--fast-units") {
      fast_units = static_cast<int>(whole(a, value(), 1, 100000));
    } else if (a == "--json") {
      json_file = value();
    } else if (a == "--skip") {
      skip.push_back(value());
    } else {
      throw UsageError("unknown option " + a);
    }
  }
  if (reps <= 0) reps = quick ? 3 : 7;
  auto skipped = [&](const std::string& part) { return std::find(skip.begin(), skip.end(), part) != skip.end(); };
  testing::TempDir dir("echoline-bench-station");
  json result = {{"quick", quick}, {"reps", reps}};
  const auto whip = testing::source_dir() / "config/recipes/whip915.jsonc";
  if (!skipped("instant") || !skipped("memory")) {
    SimProcess sim(dir.path(), "instant.jsonc", "instant");
    const auto settle0 = write_recipe(whip, dir / "whip915-settle0.json", 0.0);
    const auto shipped = write_recipe(whip, dir / "whip915-shipped.json", -1);
    if (!skipped("instant")) {
      std::cerr << "instant profile, whip915 201 points, settle 0 s (software overhead alone):\n";
      result["instant_settle0"] = instant_comparison(dir.path(), sim, settle0, reps);
      std::cerr << "instant profile, whip915 201 points, settle as shipped:\n";
      result["instant_shipped"] = instant_comparison(dir.path(), sim, shipped, reps);
    }
    if (!skipped("memory")) {
      std::vector<int> checkpoints{100};
      if (memory_units > 1000) checkpoints.push_back(1000);
      if (memory_units > 100) checkpoints.push_back(memory_units);
      if (quick) checkpoints = {50, 200};
      std::cerr << "daemon memory (instant profile, settle 0):\n";
      result["memory"] = memory_growth(dir.path(), sim, settle0, checkpoints);
    }
  }
  if (!skipped("bench")) {
    const int points = quick ? 21 : 201;
    std::cerr << fmt::format("bench latency profile, whip915 {} points:\n", points);
    result["bench_profile"] = bench_profile(dir.path(), points, quick ? 2 : 3);
  }
  if (!skipped("fast")) {
    std::cerr << "bench latency profile, fast capture (whip915-fast) against the step sweep (whip915), unit by unit:\n";
    result["fast_capture"] = fast_capture_profile(dir.path(), fast_units > 0 ? fast_units : (quick ? 10 : 0));
  }
  if (json_file.empty()) {
    std::cout << result.dump(2) << "\n";
  } else {
    std::ofstream(json_file) << result.dump(2) << "\n";
  }
  return 0;
} catch (const UsageError& e) {
  std::cerr << "bench_station: " << e.what() << "\n" << kUsage;
  return 2;
} catch (const std::exception& e) {
  std::cerr << "bench_station: " << e.what() << "\n";
  return 1;
}
