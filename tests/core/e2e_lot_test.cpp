// End to end: echoline-sim (instant profile) with the whip915-lot-a lot, echolined on it,
// calibrate over the API, test every unit, score the verdicts against the simulator's truth.
// Also: the daemon is SIGKILLed mid-lot and restarted; its store must still hold every run.
#include <algorithm>
#include <cmath>
#include <fstream>
#include <iterator>
#include <set>

#include <fmt/format.h>
#include <gtest/gtest.h>

#include "daemon/core/recipe_loader.hpp"
#include "tests/core/e2e_station.hpp"

namespace echoline::e2e {
namespace {

struct Truth {
  bool meets_limits = true;     // true RL meets every mask segment
  bool in_window = true;        // true resonance inside the resonance window
  std::string defect;
  double excess_mm = 0;   // element_length - nominal_length
  std::string why;
};

// The unit's own (bench-error-free) return loss against the recipe's limits: every mask
// segment sampled at 0.25 MHz, and the true resonance against the resonance window.
Truth truth_of(Sim& sim, const std::string& serial, const core::Recipe& recipe) {
  Truth t;
  for (const auto& seg : recipe.limits.mask) {
    std::vector<double> f;
    for (double x = seg.start_hz; x <= seg.stop_hz + 1; x += 0.25e6) f.push_back(x);
    json r = sim.control({{"cmd", "truth"}, {"unit", serial}, {"frequencies_hz", f}});
    if (!r.value("ok", false)) throw std::runtime_error("truth: " + r.dump());
    t.defect = r.value("defect", "");
    t.excess_mm = r["element_length_mm"].get<double>() - r["nominal_length_mm"].get<double>();
    for (std::size_t i = 0; i < f.size(); ++i) {
      if (r["return_loss_db"][i].get<double>() < seg.min_return_loss_db) {
        t.meets_limits = false;
        t.why = fmt::format("true RL {:.2f} dB < {} dB at {:.2f} MHz", r["return_loss_db"][i].get<double>(),
                            seg.min_return_loss_db, f[i] / 1e6);
        break;
      }
    }
    if (recipe.limits.resonance_min_hz && recipe.limits.resonance_max_hz) {
      const double f0 = r["f0_hz"].get<double>();
      if (f0 < *recipe.limits.resonance_min_hz || f0 > *recipe.limits.resonance_max_hz) {
        t.in_window = false;
        t.why += fmt::format(" true f0 {:.2f} MHz outside the window", f0 / 1e6);
      }
    }
  }
  return t;
}

TEST(E2eLot, Whip915LotScoredAgainstTruthSurvivesDaemonKill) {
  const auto recipe = core::load_recipe(testing::source_dir() / "config/recipes/whip915.jsonc");
  testing::TempDir dir{"echoline-e2e-lot"};
  Sim sim("whip915-lot-a.jsonc");
  const auto config = write_station_config(dir.path(), sim);
  std::optional<Daemon> daemon(std::in_place, config);
  std::optional<Api> api(Api::connect(*daemon));

  json cal = calibrate(*api, sim);
  ASSERT_EQ(cal["event"], "result") << cal.dump();
  ASSERT_TRUE(cal["calibration"]["valid"].get<bool>()) << cal.dump();

  auto units = sim.units();
  ASSERT_GE(units.size(), 200u);
  units.resize(200);   // 200 units keep the test near two minutes on a loaded machine
  const std::size_t kill_at = units.size() / 2;

  std::map<std::string, json> runs;   // serial -> final run
  std::set<std::string> run_ids;
  const auto t0 = std::chrono::steady_clock::now();
  for (std::size_t i = 0; i < units.size(); ++i) {
    if (i == kill_at) {
      // SIGKILL mid-run, then restart on the same store.
      sim.connect_unit(units[i]);
      json r = api->call("test.start", {{"serial", units[i]}, {"lot", "LOT-A"}});
      if (!r["ok"].get<bool>() && r["error"]["code"] == "check_due") {
        ASSERT_EQ(check_standard(*api, sim)["event"], "result");
        sim.connect_unit(units[i]);
        r = api->call("test.start", {{"serial", units[i]}, {"lot", "LOT-A"}});
      }
      ASSERT_TRUE(r["ok"].get<bool>()) << r.dump();
      ASSERT_EQ(api->next_event()["event"], "progress");
      EXPECT_EQ(daemon->process().kill_now(), -9);
      api.reset();
      daemon.reset();
      daemon.emplace(config);
      api.emplace(Api::connect(*daemon));
      json lot = api->call("runs.lot", {{"lot", "LOT-A"}});
      ASSERT_TRUE(lot["ok"].get<bool>()) << lot.dump();
      std::set<std::string> stored;
      for (const auto& run : lot["result"]["runs"]) stored.insert(run["run_id"].get<std::string>());
      for (const auto& id : run_ids) EXPECT_TRUE(stored.count(id)) << "run " << id << " lost after SIGKILL";
      // The killed run was on record before RF went on; the restart stored it as aborted.
      int killed = 0;
      for (const auto& run : lot["result"]["runs"]) {
        if (run_ids.count(run["run_id"].get<std::string>())) continue;
        ++killed;
        EXPECT_EQ(run["serial"], units[i]);
        EXPECT_EQ(run["verdict"], "aborted") << run.dump();
        EXPECT_EQ(run["reason"], "daemon stopped unexpectedly") << run.dump();
      }
      EXPECT_EQ(killed, 1);
      // The calibration made before the kill is still in force (loaded from the store).
      EXPECT_FALSE(api->call("cal.status")["result"]["due"].get<bool>());
    }
    json run = test_unit(*api, sim, units[i], "LOT-A");
    runs[units[i]] = run;
    run_ids.insert(run["run_id"].get<std::string>());
  }
  const double seconds = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();

  int escapes = 0, false_rejects = 0, inconclusive = 0, aborted = 0, passes = 0, trim_checked = 0;
  int window_disagreements = 0;
  double sweep_s = 0, machine_s = 0;
  long points = 0;
  double worst_trim_error = 0;
  for (const auto& [serial, run] : runs) {
    const std::string verdict = run["verdict"];
    sweep_s += run["timings"]["sweep_s"].get<double>();
    machine_s += run["timings"]["total_s"].get<double>();
    points += run["points_count"].get<long>();
    Truth t = truth_of(sim, serial, recipe);
    if (verdict == "aborted") ++aborted;
    if (verdict == "inconclusive") ++inconclusive;
    if (verdict == "pass") ++passes;
    // Guarded acceptance (ILAC-G8:09/2019 §4.2.2, JCGM 106:2012 §8.3.3): a pass must be a pass
    // whatever the measurement error; a unit whose true RL misses a limit must never pass.
    if (verdict == "pass" && !t.meets_limits) {
      ++escapes;
      ADD_FAILURE() << "escape: " << serial << " passed but " << t.why << " (defect '" << t.defect << "')";
    }
    if (verdict == "fail" && t.meets_limits && t.in_window && t.defect != "intermittent") {
      ++false_rejects;
      std::printf("[ lot     ] false reject %s (defect '%s'): %s %s\n", serial.c_str(), t.defect.c_str(),
                  run["failure_class"].get<std::string>().c_str(), run["reason"].get<std::string>().c_str());
    }
    // The resonance window is a frequency limit: the guarded rule covers the return-loss
    // uncertainty, not the resonance frequency's, so a pass of a unit whose TRUE resonance sits
    // just outside the window is counted and printed, not an RL escape.
    if (verdict == "pass" && t.meets_limits && !t.in_window) ++window_disagreements;
    // Trim advice: resonance scales as 1/length (common practice), so the advised cut matches the
    // true excess length of a unit cut too long when its dip lies inside the sweep.
    const bool has_trim = run.contains("trim") && !run["trim"].is_null();
    const bool dip_in_sweep = run["metrics"]["resonance_hz"].is_number() &&
                              run["metrics"]["resonance_hz"].get<double>() > recipe.segments.front().start_hz + 2e6;
    if (run["failure_class"] == "tuned-low" && t.excess_mm > 0 && has_trim && dip_in_sweep) {
      const double cut = -run["trim"]["change_mm"].get<double>();
      worst_trim_error = std::max(worst_trim_error, std::abs(cut - t.excess_mm));
      if (t.defect == "too-long") {
        EXPECT_NEAR(cut, t.excess_mm, 0.10 * t.excess_mm) << serial << ": " << run["trim"].dump();
        ++trim_checked;
      }
    }
    if (t.defect == "too-long") {
      std::printf("[ lot     ] %s too long by %.2f mm: %s %s, resonance %s, trim %s\n", serial.c_str(), t.excess_mm,
                  verdict.c_str(), run["failure_class"].get<std::string>().c_str(),
                  run["metrics"]["resonance_hz"].dump().c_str(), has_trim ? run["trim"]["text"].get<std::string>().c_str() : "none");
    }
    if (t.defect == "too-long") {
      EXPECT_EQ(verdict, "fail") << serial;
      EXPECT_EQ(run["failure_class"], "tuned-low") << serial << " " << run["reason"];
    }
  }
  EXPECT_EQ(escapes, 0);
  EXPECT_EQ(aborted, 0);
  EXPECT_GT(passes, static_cast<int>(units.size()) / 2);   // most of the lot is good (lot file)
  std::printf("[ lot     ] %zu units in %.1f s (%.3f s/unit incl. client): pass %d, inconclusive %d, "
              "false rejects %d, RL escapes %d, passes with true resonance outside the window %d, "
              "trim advice checked on %d too-long units (largest |advice - true excess| over all tuned-low %.2f mm)\n",
              units.size(), seconds, seconds / static_cast<double>(units.size()), passes, inconclusive, false_rejects,
              escapes, window_disagreements, trim_checked, worst_trim_error);

  // Timing is printed, never asserted (it depends on the machine and its load).
  std::printf("[ timing  ] step sweep %.0f points/s; machine time per unit %.3f s (sweep %.3f s)\n",
              static_cast<double>(points) / sweep_s, machine_s / static_cast<double>(runs.size()),
              sweep_s / static_cast<double>(runs.size()));

  json lot = api->call("runs.lot", {{"lot", "LOT-A"}});
  EXPECT_EQ(lot["result"]["runs"].size(), units.size() + 1);   // and the killed run, stored as aborted
  EXPECT_EQ(daemon->process().terminate(10s), 0);
}

// whip915's sweep starts at 860 MHz; lot A's two units cut too long (by 5.1 and 6.3 mm)
// resonate below it. The same recipe widened to 780 MHz puts their dips inside the sweep.
TEST(E2eLot, UnitCutTooLongGetsTrimAdviceWithinTenPercentOfTheTrueExcess) {
  testing::TempDir dir{"echoline-e2e-trim"};
  std::ifstream in(testing::source_dir() / "config/recipes/whip915.jsonc");
  std::string text((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  const std::string from = R"({ "start_hz": "860 MHz", "stop_hz": "970 MHz", "points": 221 })";
  const auto at = text.find(from);
  ASSERT_NE(at, std::string::npos) << "whip915.jsonc segment changed; update this test";
  text.replace(at, from.size(), R"({ "start_hz": "780 MHz", "stop_hz": "970 MHz", "points": 381 })");
  const auto recipe_file = dir / "whip915-wide.jsonc";
  std::ofstream(recipe_file) << text;

  Sim sim("whip915-lot-a.jsonc");
  auto config = write_station_config(dir.path(), sim);
  Daemon daemon(config, {"--recipe", recipe_file.string()});
  Api api = Api::connect(daemon);
  ASSERT_EQ(calibrate(api, sim)["event"], "result");
  int checked = 0;
  for (const auto& serial : sim.units()) {
    json truth = sim.control({{"cmd", "truth"}, {"unit", serial}, {"frequencies_hz", {915e6}}});
    if (truth["defect"] != "too-long") continue;
    const double excess = truth["element_length_mm"].get<double>() - truth["nominal_length_mm"].get<double>();
    json run = test_unit(api, sim, serial);
    EXPECT_EQ(run["verdict"], "fail") << serial;
    EXPECT_EQ(run["failure_class"], "tuned-low") << serial;
    ASSERT_TRUE(run.contains("trim") && !run["trim"].is_null()) << run.dump();
    const double cut = -run["trim"]["change_mm"].get<double>();   // negative change = cut
    // f0 scales as 1/length (common practice): the advised cut is the true excess to within 10 %.
    EXPECT_NEAR(cut, excess, 0.10 * excess) << serial << ": " << run["trim"].dump();
    std::printf("[ trim    ] %s: true excess %.2f mm, advice: %s\n", serial.c_str(), excess,
                run["trim"]["text"].get<std::string>().c_str());
    ++checked;
  }
  EXPECT_EQ(checked, 2);   // lot A: too-long fraction 0.0084 of 240 units (lot file)
}

}  // namespace
}  // namespace echoline::e2e
