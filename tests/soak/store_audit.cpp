// Run store audit against ground truth (store_audit.hpp).
#include "tests/soak/store_audit.hpp"

#include <cmath>
#include <map>

#include <fmt/format.h>

#include "daemon/core/recipe_loader.hpp"

namespace echoline::soak {

using nlohmann::json;

AuditResult audit_store(StationUnderTest& station, const AuditOptions& given) {
  AuditOptions options = given;
  if (options.plan_points == 0 || !options.limits) {
    const core::Recipe recipe = core::load_recipe(station.setup().recipe);
    if (options.plan_points == 0) options.plan_points = static_cast<int>(core::plan_frequencies(recipe).size());
    if (!options.limits) options.limits = limits_of(recipe);
  }
  AuditResult a;
  a.integrity = station.integrity_check();
  if (a.integrity != "ok") a.problems.push_back("PRAGMA integrity_check: " + a.integrity);
  const auto runs = station.stored_runs(options.with_truth);
  for (const auto& r : runs) {
    ++a.stored;
    if (r.verdict == "aborted") {
      ++a.stored_aborted;
      continue;
    }
    ++a.judged;
    if (r.readings != options.plan_points || r.points_count != r.readings) {
      ++a.incomplete_judged;
      a.problems.push_back(fmt::format("run {} ({}, {}): {} readings stored, points_count {}, plan {}", r.run_id, r.serial,
                                       r.verdict, r.readings, r.points_count, options.plan_points));
    }
    if (r.verdict == "pass" && r.readings < options.plan_points) ++a.partial_passes;
    if (!options.with_truth || r.points.empty()) continue;

    std::vector<double> freqs;
    for (const auto& p : r.points) freqs.push_back(p.frequency_hz);
    json t = station.truth(r.serial, freqs);
    std::vector<double> true_rl;
    for (const auto& v : t["return_loss_db"]) true_rl.push_back(v.is_number() ? v.get<double>() : NAN);
    const std::string defect = t.value("defect", "");
    ++a.truth_scored;

    // Intermittent units change between sweeps on purpose: their readings need not fit the
    // nominal truth, so they are left out of the identity check (not out of the pass check).
    if (defect != "intermittent") {
      if (auto misfit = rms_misfit_db(r.points, true_rl)) {
        if (*misfit > a.worst_misfit_db) {
          a.worst_misfit_db = *misfit;
          a.worst_misfit_run = fmt::format("{} ({})", r.run_id, r.serial);
        }
        if (*misfit > options.misfit_limit_db) {
          ++a.misattributed;
          a.problems.push_back(fmt::format("run {} of {}: return loss misfits the unit's truth by {:.2f} dB RMS", r.run_id,
                                           r.serial, *misfit));
        }
      }
    }
    if (r.verdict == "pass") {
      std::string why;
      if (!truth_accepts(freqs, true_rl, t.value("f0_hz", 0.0), *options.limits, &why)) {
        ++a.false_passes;
        a.problems.push_back(fmt::format("run {} of {} ({}): pass, but {}", r.run_id, r.serial, defect, why));
      }
    }
  }
  return a;
}

}  // namespace echoline::soak
