// Station timing benchmark. Starts echoline-sim and echolined (real processes, loopback) and
// measures, side by side in one run:
//   - time per point of a 201-point step sweep through the daemon (test.start -> result / points)
//     against the loopback floor (the same SCPI on bare sessions) and against a plain Python
//     script (scripts/plain_sweep.py), on the `instant` latency profile;
//   - the cycle time on the `bench` latency profile against the time the instruments impose
//     (replies x command time + sweeps x sweep time + points x settle), from the sim's counters;
//   - the daemon's resident memory after 100, 1000 and 10 000 units (--memory-units).
// Prints progress on stderr and one JSON document (raw samples) on stdout or --json FILE.
// Asserts nothing about time. Single-threaded.
#include <unistd.h>

#include <algorithm>
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
#include "drivers/scpi_session.hpp"
#include "drivers/transport.hpp"
#include "drivers/whole_number.hpp"
#include "tests/bench/floor_client.hpp"
#include "tests/bench/station_rig.hpp"
#include "tests/support/process.hpp"

namespace {

using namespace echoline;
using namespace echoline::bench;
using json = nlohmann::json;

constexpr const char* kUsage = R"(usage: bench_station [--quick] [--reps N] [--memory-units N] [--json FILE] [--skip PART]
N: --reps 1 to 1000, --memory-units 1 to 1000000.

Times the Echoline step sweep through echolined against the loopback floor and a plain Python
script, the cycle time on the bench latency profile, and the daemon's memory over many units.
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

// Fast capture on the bench profile: cycle time against what the instruments impose (the max-hold
// sweeps, the recipe's settle, and the command time of each reply), beside a 201-point step
// sweep of the same units with the shipped step recipe.
json fast_capture_profile(const std::filesystem::path& dir, int reps) {
  SimProcess sim(dir, "bench.jsonc", "bench");
  const auto fast_file = write_recipe(testing::source_dir() / "config/recipes/whip915-fast.jsonc", dir / "whip915-fast-bench.json", -1);
  const auto step_file = write_recipe(testing::source_dir() / "config/recipes/whip915.jsonc", dir / "whip915-step-bench.json", -1);
  const core::Recipe fast = core::load_recipe(fast_file);
  double command_s = 0.003;
  {
    json cfg = json::parse(std::ifstream(testing::source_dir() / "config/sim/bench.jsonc"), nullptr, true, true);
    command_s = cfg["latency"].value("command_ms", 3.0) / 1e3;
  }
  auto plan = core::plan_fast_capture(fast);
  if (!plan) throw std::runtime_error(plan.error().message);
  const double capture_s = plan->receiver_sweeps * plan->receiver_sweep_s + fast.source.settle_s;
  const auto units = sim.units();
  json out = {{"recipe", fast.name}, {"points", core::plan_frequencies(fast).size()}, {"capture_s", capture_s}, {"command_s", command_s}};
  std::vector<double> step_cycles;
  {
    DaemonProcess daemon(dir, sim, step_file);
    out["step_calibration_s"] = daemon.calibrate();
    for (int r = 0; r < reps; ++r) {
      const auto t = daemon.test_unit(units[static_cast<std::size_t>(r) % units.size()], fmt::format("STEP-{:04d}", r + 1));
      step_cycles.push_back(t.seconds);
      out["step_cycle_s"].push_back(t.seconds);
    }
  }
  DaemonProcess daemon(dir, sim, fast_file);
  out["calibration_s"] = daemon.calibrate();
  for (int r = 0; r < reps; ++r) {
    const auto before = replies(sim);
    const auto t = daemon.test_unit(units[static_cast<std::size_t>(r) % units.size()], fmt::format("FAST-{:04d}", r + 1));
    const auto after = replies(sim);
    const double reply_count = (after.first - before.first) + (after.second - before.second);
    const double imposed = capture_s + reply_count * command_s;
    out["cycle_s"].push_back(t.seconds);
    out["replies_per_run"].push_back(reply_count);
    out["imposed_s"].push_back(imposed);
    out["overhead_pct"].push_back(100.0 * (t.seconds / imposed - 1.0));
    out["overhead_vs_capture_pct"].push_back(100.0 * (t.seconds / capture_s - 1.0));
    out["step_over_fast"].push_back(step_cycles[static_cast<std::size_t>(r)] / t.seconds);
    std::cerr << fmt::format("  rep {}: fast capture cycle {:.3f} s, imposed {:.3f} s ({} replies; capture alone {:.3f} s); "
                             "step sweep {:.3f} s\n", r + 1, t.seconds, imposed, reply_count, capture_s,
                             step_cycles[static_cast<std::size_t>(r)]);
  }
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
  int reps = 0, memory_units = 10000;
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
    std::cerr << "bench latency profile, fast capture (whip915-fast) beside the 201-point step sweep:\n";
    result["fast_capture"] = fast_capture_profile(dir.path(), quick ? 2 : 3);
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
