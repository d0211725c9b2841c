// Benchmarks of the pure computation and the run store: calibration build and judging per run
// (201 and 1601 points; with and without the dip fit, and the fit alone), one synchronous store
// commit per 201-point run, and the lot report over 10 000 runs. Prints numbers only (Google Benchmark); asserts nothing about time.
// Single-threaded. Store files live in a temp folder removed at exit.
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <memory>
#include <stdexcept>
#include <string>
#include <vector>

#include <benchmark/benchmark.h>
#include <fmt/format.h>

#include "daemon/core/analysis.hpp"
#include "daemon/core/calibration.hpp"
#include "daemon/core/dip_fit.hpp"
#include "daemon/core/judge.hpp"
#include "daemon/store/lot_report.hpp"
#include "daemon/store/run_store.hpp"
#include "tests/bench/bench_data.hpp"

namespace {

using namespace echoline;

core::CalibrationRecord calibrate(const core::Recipe& recipe) {
  return core::build_calibration(recipe, bench::standard_traces(recipe), bench::station_capability(), "cal-bench",
                                 "2026-03-02T07:00:00.000Z");
}

void BM_BuildCalibration(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(static_cast<int>(state.range(0)));
  const auto traces = bench::standard_traces(recipe);
  const auto cap = bench::station_capability();
  for (auto _ : state) {
    auto cal = core::build_calibration(recipe, traces, cap, "cal-bench", "2026-03-02T07:00:00.000Z");
    benchmark::DoNotOptimize(cal);
  }
  if (!calibrate(recipe).valid) state.SkipWithError("the synthetic calibration is not valid");
}
BENCHMARK(BM_BuildCalibration)->Arg(201)->Arg(1601)->Unit(benchmark::kMicrosecond);

void BM_Judge(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(static_cast<int>(state.range(0)));
  const auto cal = calibrate(recipe);
  const auto dut = bench::dut_readings(recipe, 912e6);
  for (auto _ : state) {
    auto j = core::judge(recipe, cal, dut);
    benchmark::DoNotOptimize(j);
  }
  if (core::judge(recipe, cal, dut).verdict == core::Verdict::aborted)
    state.SkipWithError("the synthetic run was judged aborted");
}
BENCHMARK(BM_Judge)->Arg(201)->Arg(1601)->Unit(benchmark::kMicrosecond);

// Judging without the dip fit (the resonance intervals of the points alone), for comparison.
void BM_JudgeWithoutFit(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(static_cast<int>(state.range(0)));
  const auto cal = calibrate(recipe);
  const auto dut = bench::dut_readings(recipe, 912e6);
  for (auto _ : state) {
    auto j = core::judge(recipe, cal, dut, core::JudgeOptions{false});
    benchmark::DoNotOptimize(j);
  }
}
BENCHMARK(BM_JudgeWithoutFit)->Arg(201)->Unit(benchmark::kMicrosecond);

// The dip fit alone on one calibrated 201-point unit: both unit models from three starts each
// (dip_fit.hpp). Budget: 2 ms per unit, so that the test cycle does not slow.
void BM_DipFit(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(static_cast<int>(state.range(0)));
  const auto cal = calibrate(recipe);
  const core::CalibratedTrace trace = core::calibrate_points(cal, bench::dut_readings(recipe, 912e6));
  const core::ShiftContext& c = trace.shift;
  core::DipFitContext ctx{c.reading_sigma_db, c.error_vector, c.source_match, c.error_delay_s, c.coverage_factor};
  std::size_t peak = 0;
  for (std::size_t i = 1; i < trace.points.size(); ++i) {
    if (trace.points[i].return_loss_db > trace.points[peak].return_loss_db) peak = i;
  }
  for (auto _ : state) {
    auto fit = core::fit_dip(trace.points, peak, ctx, recipe.limits.bandwidth_threshold_db, 0);
    benchmark::DoNotOptimize(fit);
  }
  const auto fit = core::fit_dip(trace.points, peak, ctx, recipe.limits.bandwidth_threshold_db, 0);
  state.counters["models_fitted"] = static_cast<double>(fit.models.size());
  state.counters["window_points"] = fit.points;
  if (fit.models.empty()) state.SkipWithError(("the fit stopped before fitting: " + fit.refused).c_str());
}
BENCHMARK(BM_DipFit)->Arg(201)->Unit(benchmark::kMicrosecond);

// The offset pair's resonance bound alone (pair_shift_bound.hpp) on a 201-point trace: the two
// windows' quadratic and cubic fits and the terms' bounds. It runs on every unit read with the pair.
void BM_PairShiftBound(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(static_cast<int>(state.range(0)));
  const auto cal = calibrate(recipe);
  const core::CalibratedTrace trace = core::calibrate_points(cal, bench::dut_readings(recipe, 912e6));
  core::PairSumTrace t;
  t.nuisance.line = core::OffsetLine{273.2e-12, 2e-12, 0.08, 0.04, 0.0112};
  t.nuisance.source_match = 0.056;
  t.nuisance.connection = 0.003;
  std::size_t peak = 0;
  for (std::size_t i = 0; i < trace.points.size(); ++i) {
    const core::PointResult& p = trace.points[i];
    const double g2 = std::pow(10.0, -p.return_loss_db / 10);
    t.frequency_hz.push_back(p.frequency_hz);
    t.y.push_back(g2);
    t.sigma_y.push_back(0.007 * g2);
    t.gamma_high.push_back(std::sqrt(g2) + 0.04);
    t.return_loss_db.push_back(p.return_loss_db);
    t.leakage.push_back(0.03);
    t.load_residual.push_back(0.01);
    t.turn_error_rad.push_back(0.1);
    t.usable.push_back(true);
    if (p.return_loss_db > trace.points[peak].return_loss_db) peak = i;
  }
  for (auto _ : state) {
    auto b = core::pair_shift_bound(t, peak);
    benchmark::DoNotOptimize(b);
  }
  if (!core::pair_shift_bound(t, peak)) state.SkipWithError("no bound on the benchmark's dip");
}
BENCHMARK(BM_PairShiftBound)->Arg(201)->Unit(benchmark::kMicrosecond);

// One synchronous commit (WAL, synchronous=FULL as shipped) of a 201-point run with its points.
void BM_StoreCommitRun(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(201);
  const auto cal = calibrate(recipe);
  static int file_counter = 0;
  auto store = store::RunStore::open(bench::temp_folder() / fmt::format("commit-{}.sqlite", ++file_counter));
  if (!store) {
    state.SkipWithError(store.error().message.c_str());
    return;
  }
  core::RunResult run = bench::make_run(recipe, cal, "LOT-A", 1);
  long n = 0;
  for (auto _ : state) {
    run.run_id = fmt::format("bench-commit-{:08d}", ++n);
    if (Status s = (*store)->save_run(run); !s) {
      state.SkipWithError(s.error().message.c_str());
      break;
    }
  }
  state.SetItemsProcessed(n);
}
BENCHMARK(BM_StoreCommitRun)->Unit(benchmark::kMicrosecond)->MinTime(1.0);

const std::vector<core::RunResult>& lot_runs_10k() {
  static const std::vector<core::RunResult> runs = [] {
    const core::Recipe recipe = bench::whip_recipe(201);
    const auto cal = calibrate(recipe);
    std::vector<core::RunResult> v;
    v.reserve(10000);
    for (int i = 0; i < 10000; ++i) v.push_back(bench::make_run(recipe, cal, "LOT-A", i));
    return v;
  }();
  return runs;
}

// The HTML lot report (stats, overlay of every unit, histogram) from 10 000 runs in memory.
void BM_LotReportBuild(benchmark::State& state) {
  const core::Recipe recipe = bench::whip_recipe(201);
  const std::vector<core::CalibrationRecord> cals{calibrate(recipe)};
  const auto& runs = lot_runs_10k();
  std::size_t bytes = 0;
  for (auto _ : state) {
    std::string html = store::build_lot_report("LOT-A", runs, cals, recipe.limits);
    bytes = html.size();
    benchmark::DoNotOptimize(html);
  }
  state.counters["html_MB"] = static_cast<double>(bytes) / 1e6;
}
BENCHMARK(BM_LotReportBuild)->Unit(benchmark::kMillisecond)->Iterations(3);

// Loading those 10 000 runs with their points back from the store (what report.lot does first).
void BM_LotRunsLoad(benchmark::State& state) {
  const auto& runs = lot_runs_10k();
  auto store = store::RunStore::open(bench::temp_folder() / "lot10k.sqlite");
  if (!store) {
    state.SkipWithError(store.error().message.c_str());
    return;
  }
  if (auto count = (*store)->run_count(runs.front().serial); count && *count == 0) {
    for (const auto& run : runs) {
      if (Status s = (*store)->save_run(run); !s) {
        state.SkipWithError(s.error().message.c_str());
        return;
      }
    }
  }
  std::size_t loaded = 0;
  for (auto _ : state) {
    auto got = (*store)->lot_runs("LOT-A", true);
    if (!got) {
      state.SkipWithError(got.error().message.c_str());
      break;
    }
    loaded = got->size();
  }
  if (loaded != runs.size()) state.SkipWithError("lot_runs did not return every stored run");
}
BENCHMARK(BM_LotRunsLoad)->Unit(benchmark::kMillisecond)->Iterations(3);

}  // namespace

BENCHMARK_MAIN();
