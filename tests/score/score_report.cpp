// Acceptance thresholds, summary and JSON of one scoring run (score_report.hpp).
#include "tests/score/score_report.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

namespace echoline::score {
namespace {

using nlohmann::json;

double pct(double part, double whole) { return whole > 0 ? 100.0 * part / whole : 0.0; }

const std::vector<std::string> kClassOrder = {"no-response", "tuned-low", "tuned-high", "shallow", "out-of-mask", "(none)"};

void print_list(std::FILE* out, const char* title, const std::vector<std::string>& items, std::size_t limit = 40) {
  if (items.empty()) return;
  std::fprintf(out, "  %s (%zu):\n", title, items.size());
  for (std::size_t i = 0; i < items.size() && i < limit; ++i) std::fprintf(out, "    %s\n", items[i].c_str());
  if (items.size() > limit) std::fprintf(out, "    ... %zu more (see the JSON file)\n", items.size() - limit);
}

void print_reasons(std::FILE* out, const char* title, const std::map<std::string, int>& reasons, std::size_t limit = 12) {
  if (reasons.empty()) return;
  std::vector<std::pair<std::string, int>> v(reasons.begin(), reasons.end());
  std::stable_sort(v.begin(), v.end(), [](const auto& a, const auto& b) { return a.second > b.second; });
  std::fprintf(out, "  %s (first 60 characters; %zu groups):\n", title, v.size());
  for (std::size_t i = 0; i < v.size() && i < limit; ++i) std::fprintf(out, "    %4d  %s\n", v[i].second, v[i].first.c_str());
  if (v.size() > limit) std::fprintf(out, "    ... %zu more groups (see the JSON file)\n", v.size() - limit);
}

void print_confusion(std::FILE* out, const ClassFigures& c) {
  if (c.failed == 0) return;
  std::vector<std::string> cols;
  for (const auto& k : kClassOrder) {
    for (const auto& [e, row] : c.confusion) {
      if (row.count(k) && std::find(cols.begin(), cols.end(), k) == cols.end()) cols.push_back(k);
    }
  }
  std::fprintf(out, "  failure classes, expected (rows) x reported (columns):\n    %-20s", "");
  for (const auto& k : cols) std::fprintf(out, " %12s", k.c_str());
  std::fprintf(out, "\n");
  for (const auto& [expected, row] : c.confusion) {
    std::fprintf(out, "    %-20s", expected.c_str());
    for (const auto& k : cols) {
      auto it = row.find(k);
      std::fprintf(out, " %12d", it == row.end() ? 0 : it->second);
    }
    std::fprintf(out, "\n");
  }
}

json checks_json(const std::vector<AcceptanceCheck>& checks) {
  json a = json::array();
  for (const auto& c : checks) a.push_back({{"name", c.name}, {"value", c.value}, {"target", c.target}, {"met", c.met}});
  return a;
}

json bounds_json(const BoundsFigures& b) {
  return {{"points", b.points}, {"outside", b.outside}, {"largest_excursion_db", b.largest_excursion_db},
          {"largest_at", b.largest_at}, {"runs", b.runs}};
}

}  // namespace

bool ScoreResult::safety_met() const {
  for (const AcceptanceCheck& c : checks) {
    const bool safety = c.name == "points outside bounds" || c.name == "escapes" || c.name == "false rejects" ||
                        c.name == "trim advice on non-length defects" || c.name == "true resonance outside interval";
    if (safety && !c.met) return false;
  }
  return !checks.empty();
}

bool ScoreResult::all_met() const {
  return !checks.empty() && std::all_of(checks.begin(), checks.end(), [](const AcceptanceCheck& c) { return c.met; });
}

std::vector<AcceptanceCheck> acceptance(const VerdictFigures& v, const ClassFigures& c, const WindowFigures& w) {
  std::vector<AcceptanceCheck> out;
  const double units = v.units;
  out.push_back({"points outside bounds",
                 fmt::format("{} of {} (largest {:.3f} dB)", v.bounds.outside, v.bounds.points,
                             v.bounds.largest_excursion_db),
                 "0", v.bounds.outside == 0});
  out.push_back({"escapes", fmt::format("{}", v.escapes.size()), "0", v.escapes.empty()});
  const int fr = static_cast<int>(v.false_rejects.size());
  out.push_back({"false rejects", fmt::format("{} ({:.2f} %)", fr, pct(fr, units)), "<= 1 % of units",
                 fr <= 0.01 * units + 1e-9});
  out.push_back({"inconclusive", fmt::format("{} ({:.2f} %)", v.inconclusive, pct(v.inconclusive, units)),
                 "<= 5 % of units", v.inconclusive <= 0.05 * units + 1e-9});
  out.push_back({"class accuracy",
                 c.failed == 0 ? std::string("no failed units")
                               : fmt::format("{} of {} ({:.1f} %)", c.accepted, c.failed, 100 * c.accuracy()),
                 ">= 95 % of failed units", c.accepted >= 0.95 * c.failed - 1e-9});
  out.push_back({"trim advice on non-length defects", fmt::format("{}", v.trim_on_non_length.size()), "0",
                 v.trim_on_non_length.empty()});
  out.push_back({"window: |predicted - observed|",
                 w.predicted ? fmt::format("{:.1f} % vs {:.1f} % ({:+.1f} pp)", 100 * w.predicted_fraction,
                                           100 * w.observed_fraction(), w.difference_pp())
                             : std::string("no prediction"),
                 "<= 10 pp", w.predicted && std::fabs(w.difference_pp()) <= 10.0});
  out.push_back({"true resonance outside interval",
                 fmt::format("{} of {}", w.truth_outside.size(), w.truth_checked), "0", w.truth_outside.empty()});
  // No closed rigorous interval on the median unit (every dip open at a sweep edge): no ratio.
  const bool has_ratio = w.rigorous_half_width_all_median_hz > 0;
  const double ratio = has_ratio ? w.observed_half_width_median_hz / w.rigorous_half_width_all_median_hz : 0;
  out.push_back({"window: half-width / rigorous",
                 has_ratio ? fmt::format("{:.2f} ({:.2f} / {:.2f} MHz, fit decided {} of {})", ratio,
                                         w.observed_half_width_median_hz / 1e6, w.rigorous_half_width_all_median_hz / 1e6,
                                         w.fit_used, w.judged)
                           : fmt::format("none (no closed rigorous interval; fit decided {} of {})", w.fit_used, w.judged),
                 "<= 0.25 (median)", has_ratio && ratio <= 0.25});
  out.push_back({"window: inconclusive",
                 fmt::format("{} of {} ({:.1f} %; {:.1f} % without the fit)", w.inconclusive, w.judged,
                             100 * w.observed_fraction(), w.judged ? 100.0 * w.inconclusive_without_fit / w.judged : 0.0),
                 "<= 5 % (35 dB coupler)", w.observed_fraction() <= 0.05 + 1e-9});
  return out;
}

void print_report(std::FILE* out, const ScoreResult& r) {
  const VerdictFigures& v = r.verdicts;
  std::fprintf(out, "==== %s ====\n", r.label.c_str());
  std::fprintf(out, "  bench %s (coupler %.0f dB), lot %s, recipe %s, window recipe %s\n", r.sim_config.c_str(),
               r.directivity_db, r.lot_file.c_str(), r.recipe.c_str(), r.window_recipe.c_str());
  std::fprintf(out, "  units %d: ", v.units);
  for (const auto& [verdict, n] : v.verdicts) std::fprintf(out, "%s %d  ", verdict.c_str(), n);
  std::fprintf(out, "\n  station: %d runs reported, %d aborted, %d retests, %d calibration(s), %d check(s), daemon exit %d; "
               "testing %.1f s, scoring %.1f s\n",
               r.station.results, r.station.aborted_runs, r.station.retries, r.station.calibrations, r.station.checks,
               r.station.daemon_exit, r.station.test_s, r.station.score_s);
  print_list(out, "station problems", r.station.problems);
  print_list(out, "runs with true RL outside their bounds", v.bounds.runs);
  if (v.bounds_intermittent.points > 0) {
    std::fprintf(out, "  intermittent units (not scored for bounds; truth is their good state): %ld of %ld points outside\n",
                 v.bounds_intermittent.outside, v.bounds_intermittent.points);
  }
  print_list(out, "escapes", v.escapes);
  print_list(out, "false rejects", v.false_rejects);
  print_list(out, "failed intermittent units (not false rejects)", v.intermittent_failed);
  std::fprintf(out, "  inconclusive units a retest on this bench cannot settle (systematic interval): %d of %d\n",
               v.inconclusive_systematic, v.inconclusive);
  print_reasons(out, "inconclusive reasons", v.inconclusive_reasons);
  print_list(out, "inconclusive units", v.inconclusive_units, 10);
  print_confusion(out, r.classes);
  print_list(out, "misclassified failures", r.classes.misclassified);
  std::fprintf(out, "  trim advice on %d final runs\n", v.trim_advised);
  print_list(out, "trim advice on a unit whose defect is not its length", v.trim_on_non_length);

  const WindowFigures& w = r.window;
  std::fprintf(out, "  window (%s, re-judged offline): %d runs, ", w.recipe_name.c_str(), w.judged);
  for (const auto& [verdict, n] : w.verdicts) std::fprintf(out, "%s %d  ", verdict.c_str(), n);
  std::fprintf(out, "\n    observed inconclusive %.1f %% (%d, %d of them for the window)\n", 100 * w.observed_fraction(),
               w.inconclusive, w.inconclusive_for_window);
  const ReferenceUnits& ref = w.reference;
  std::fprintf(out, "    reference units: %d passing runs; median bandwidth %s, median depth %s%s, resonance mean %s sd %s\n",
               ref.count, ref.bandwidth_median_hz ? fmt::format("{:.2f} MHz", *ref.bandwidth_median_hz / 1e6).c_str() : "-",
               ref.depth_median_db ? fmt::format("{:.2f} dB", *ref.depth_median_db).c_str() : "-",
               w.depth_applied ? "" : " (recipe has no nominal depth: not applied)",
               ref.resonance_mean_hz ? fmt::format("{:.3f} MHz", *ref.resonance_mean_hz / 1e6).c_str() : "-",
               ref.resonance_sd_hz ? fmt::format("{:.3f} MHz", *ref.resonance_sd_hz / 1e6).c_str() : "-");
  if (w.predicted) {
    std::fprintf(out, "    predicted inconclusive %.1f %%: half-width %.2f MHz, error radius %.4f from calibration %s (%d used); %s\n",
                 100 * w.predicted_fraction, w.half_width_hz / 1e6, w.error_radius, w.calibration_id.c_str(),
                 w.calibrations_used, w.basis.c_str());
  }
  if (w.intervals_closed > 0) {
    // The error radius is a median over the runs the shift bound decided: none, no figure.
    std::fprintf(out, "    observed resonance intervals: median half-width %.2f MHz over %d closed intervals (%d offset-pair, %d shift-bound, %d rigorous); "
                 "median error radius at the dip where the shift bound decided %s\n",
                 w.observed_half_width_median_hz / 1e6, w.intervals_closed, w.intervals_pair, w.intervals_shift_bound, w.intervals_rigorous,
                 w.intervals_shift_bound > 0 ? fmt::format("{:.4f}", w.observed_error_radius_median).c_str() : "-");
  }
  std::fprintf(out, "    dip fit: decided %d of %d runs; where it decided, median half-width %s against %s "
               "rigorous; rigorous median over all closed intervals %.2f MHz; inconclusive without the fit %d\n",
               w.fit_used, w.judged,
               w.fit_used > 0 ? fmt::format("{:.2f} MHz", w.fit_half_width_median_hz / 1e6).c_str() : "-",
               w.fit_used > 0 ? fmt::format("{:.2f} MHz", w.rigorous_half_width_median_hz / 1e6).c_str() : "-",
               w.rigorous_half_width_all_median_hz / 1e6, w.inconclusive_without_fit);
  print_reasons(out, "dip fit refused", w.fit_refused);
  print_list(out, "true resonance outside the reported interval", w.truth_outside);
  print_reasons(out, "window inconclusive reasons", w.inconclusive_reasons);
  print_list(out, "window problems", w.problems);

  const MaskFigures& mk = r.mask;
  if (mk.predicted) {
    std::fprintf(out, "  mask prediction (recipe check's, from the calibration's error radius %.4f, LOAD %.4f and %d undecided or passing runs): "
                 "inconclusive %.1f %% predicted (%.1f-%.1f %% over the leakage phase), %.1f %% observed (%+.1f pp, %s the range); %s\n",
                 mk.error_radius, mk.leakage, mk.reference_count, 100 * mk.predicted_fraction, 100 * mk.predicted_low,
                 100 * mk.predicted_high, 100 * mk.observed_fraction, mk.difference_pp(), mk.within_range() ? "inside" : "outside",
                 mk.basis.c_str());
    for (const core::MaskGuard& g : mk.guards) {
      std::fprintf(out, "    %.1f-%.1f MHz >= %.1f dB: pass from a reading of %.2f dB, fail below %.2f dB\n", g.start_hz / 1e6,
                   g.stop_hz / 1e6, g.limit_db, g.pass_reading_db, g.fail_reading_db);
    }
  }
  print_list(out, "mask prediction problems", mk.problems);

  std::fprintf(out, "  %-36s %-34s %-24s %s\n", "acceptance figure", "measured", "target", "met");
  for (const auto& c : r.checks) {
    std::fprintf(out, "  %-36s %-34s %-24s %s\n", c.name.c_str(), c.value.c_str(), c.target.c_str(), c.met ? "yes" : "NO");
  }
  std::fprintf(out, "  result: %s\n", r.all_met() ? "every acceptance figure met" : "NOT every acceptance figure met");
}

json report_json(const ScoreResult& r) {
  const VerdictFigures& v = r.verdicts;
  const WindowFigures& w = r.window;
  json confusion = json::object();
  for (const auto& [e, row] : r.classes.confusion) {
    for (const auto& [rep, n] : row) confusion[e][rep] = n;
  }
  auto opt = [](const std::optional<double>& x) { return x ? json(*x) : json(nullptr); };
  return {
      {"label", r.label},
      {"sim_config", r.sim_config},
      {"directivity_db", r.directivity_db},
      {"lot_file", r.lot_file},
      {"recipe", r.recipe},
      {"window_recipe", r.window_recipe},
      {"station",
       {{"units_tested", r.station.units_tested}, {"results", r.station.results}, {"aborted_runs", r.station.aborted_runs},
        {"retries", r.station.retries}, {"calibrations", r.station.calibrations}, {"checks", r.station.checks},
        {"daemon_exit", r.station.daemon_exit}, {"test_s", r.station.test_s}, {"score_s", r.station.score_s},
        {"problems", r.station.problems}}},
      {"units", v.units},
      {"verdicts", v.verdicts},
      {"points_outside_bounds", bounds_json(v.bounds)},
      {"intermittent_points_outside_bounds", bounds_json(v.bounds_intermittent)},
      {"escapes", v.escapes},
      {"false_rejects", v.false_rejects},
      {"false_reject_pct", pct(static_cast<double>(v.false_rejects.size()), v.units)},
      {"intermittent_failed", v.intermittent_failed},
      {"inconclusive", v.inconclusive},
      {"inconclusive_pct", pct(v.inconclusive, v.units)},
      {"inconclusive_systematic", v.inconclusive_systematic},
      {"inconclusive_reasons", v.inconclusive_reasons},
      {"inconclusive_units", v.inconclusive_units},
      {"class_accuracy",
       {{"failed", r.classes.failed}, {"accepted", r.classes.accepted}, {"accuracy_pct", 100 * r.classes.accuracy()},
        {"confusion", confusion}, {"misclassified", r.classes.misclassified}}},
      {"trim_advised", v.trim_advised},
      {"trim_on_non_length", v.trim_on_non_length},
      {"window",
       {{"recipe", w.recipe_name},
        {"judged", w.judged},
        {"verdicts", w.verdicts},
        {"inconclusive", w.inconclusive},
        {"inconclusive_for_window", w.inconclusive_for_window},
        {"inconclusive_reasons", w.inconclusive_reasons},
        {"observed_pct", 100 * w.observed_fraction()},
        {"predicted", w.predicted},
        {"predicted_pct", 100 * w.predicted_fraction},
        {"difference_pp", w.predicted ? json(w.difference_pp()) : json(nullptr)},
        {"half_width_hz", w.half_width_hz},
        {"observed_half_width_median_hz", w.observed_half_width_median_hz},
        {"intervals_closed", w.intervals_closed},
        {"intervals_shift_bound", w.intervals_shift_bound},
        {"intervals_rigorous", w.intervals_rigorous},
        {"intervals_pair", w.intervals_pair},
        {"observed_error_radius_median", w.observed_error_radius_median},
        {"fit_used", w.fit_used},
        {"fit_refused", w.fit_refused},
        {"fit_half_width_median_hz", w.fit_half_width_median_hz},
        {"rigorous_half_width_median_hz", w.rigorous_half_width_median_hz},
        {"rigorous_half_width_all_median_hz", w.rigorous_half_width_all_median_hz},
        {"truth_checked", w.truth_checked},
        {"truth_outside", w.truth_outside},
        {"inconclusive_without_fit", w.inconclusive_without_fit},
        {"error_radius", w.error_radius},
        {"calibration_id", w.calibration_id},
        {"calibrations_used", w.calibrations_used},
        {"basis", w.basis},
        {"reference",
         {{"count", w.reference.count}, {"bandwidth_median_hz", opt(w.reference.bandwidth_median_hz)},
          {"depth_median_db", opt(w.reference.depth_median_db)}, {"depth_applied", w.depth_applied},
          {"resonance_mean_hz", opt(w.reference.resonance_mean_hz)},
          {"resonance_sd_hz", opt(w.reference.resonance_sd_hz)}}},
        {"problems", w.problems}}},
      {"mask_prediction",
       {{"predicted", r.mask.predicted}, {"reference_count", r.mask.reference_count}, {"error_radius", r.mask.error_radius}, {"leakage", r.mask.leakage},
        {"predicted_pct", 100 * r.mask.predicted_fraction}, {"predicted_low_pct", 100 * r.mask.predicted_low},
        {"predicted_high_pct", 100 * r.mask.predicted_high}, {"within_range", r.mask.within_range()}, {"observed_pct", 100 * r.mask.observed_fraction},
        {"difference_pp", r.mask.predicted ? json(r.mask.difference_pp()) : json(nullptr)}, {"basis", r.mask.basis},
        {"problems", r.mask.problems}}},
      {"acceptance", checks_json(r.checks)},
      {"all_met", r.all_met()},
  };
}

}  // namespace echoline::score
