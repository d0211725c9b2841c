// OPEN/SHORT/LOAD calibration (calibration.hpp). Method: MEASUREMENT.md §2 (dB average of OPEN
// and SHORT cancels the first-order directivity and source-match ripple); the LOAD reading
// relative to that reference is the effective directivity (MEASUREMENT.md §2–3, common practice).
#include "daemon/core/calibration.hpp"

#include <algorithm>
#include <cmath>
#include <limits>

#include <fmt/format.h>

#include "daemon/core/directivity_vector.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/uncertainty.hpp"

namespace echoline::core {
namespace {

constexpr double kInf = std::numeric_limits<double>::infinity();

// Relative tolerance for "same frequency" between a trace and the plan (plan points are
// computed; instruments may round the frequency they report).
bool same_frequency(double a, double b) { return std::fabs(a - b) <= std::max(1.0, 1e-9 * std::fabs(b)); }

// Checks a trace's length, frequencies and values against the plan; "" when fine.
std::string trace_problem(const std::string& name, const std::vector<Reading>& t, const std::vector<double>& plan) {
  if (t.size() != plan.size()) {
    return fmt::format("{} trace has {} readings but the plan has {} points", name, t.size(), plan.size());
  }
  for (std::size_t i = 0; i < t.size(); ++i) {
    if (!same_frequency(t[i].frequency_hz, plan[i])) {
      return fmt::format("{} reading {} is at {} but the plan point is {}", name, i, format_frequency(t[i].frequency_hz, 6),
                         format_frequency(plan[i], 6));
    }
    if (!std::isfinite(t[i].raw_dbm)) {
      return fmt::format("{} reading at {} is not a number", name, format_mhz(t[i].frequency_hz, 3));
    }
  }
  return "";
}

// A full reflector (OPEN or SHORT) far from the level the fixture predicts.
void check_level(const std::string& name, const std::vector<Reading>& t, double expected, double tol,
                 CalibrationRecord& rec) {
  std::size_t worst = 0, bad = 0;
  for (std::size_t i = 0; i < t.size(); ++i) {
    const double dev = std::fabs(t[i].raw_dbm - expected);
    if (dev > tol) ++bad;
    if (dev > std::fabs(t[worst].raw_dbm - expected)) worst = i;
  }
  if (bad == 0) return;
  const double got = t[worst].raw_dbm;
  const char* hint = got < expected
                         ? "is a LOAD connected instead, a cable between source, coupler and receiver missing, or the source output off?"
                         : "is the coupling or the source power other than configured?";
  rec.errors.push_back(fmt::format(
      "{} reads {:.1f} dBm at {}, expected {:.1f} dBm \u00b1 {:.0f} dB for a full reflection ({} of {} points off): {}",
      name, got, format_mhz(t[worst].frequency_hz), expected, tol, bad, t.size(), hint));
}

}  // namespace

CalibrationRecord build_calibration(const Recipe& recipe, const std::map<std::string, std::vector<Reading>>& traces,
                                    const StationCapability& station, std::string id, std::string created_utc,
                                    const CalibrationLimits& limits) {
  CalibrationRecord rec;
  rec.id = std::move(id);
  rec.created_utc = std::move(created_utc);
  rec.recipe = RecipeRef{recipe.name, recipe.version, recipe.content_hash};
  rec.traces = traces;
  rec.max_age_s = recipe.calibration.max_age_s;
  rec.max_units = recipe.calibration.max_units;
  rec.max_temperature_change_c = recipe.calibration.max_temperature_change_c;
  rec.min_directivity_db = 0;
  rec.valid = false;

  const std::vector<double> plan = plan_frequencies(recipe);
  std::vector<std::string> needed = {"OPEN", "LOAD"};
  if (recipe.calibration.use_short) needed.insert(needed.begin() + 1, "SHORT");
  if (recipe.calibration.use_mismatch) {
    if (station.kit.mismatch.empty()) rec.errors.push_back("the recipe asks for mismatch standards but the kit has none");
    for (const MismatchStandard& m : station.kit.mismatch) needed.push_back(m.name);
  }
  for (const std::string& name : needed) {
    auto it = traces.find(name);
    if (it == traces.end()) {
      rec.errors.push_back(fmt::format("the {} standard was not measured", name));
      continue;
    }
    std::string problem = trace_problem(name, it->second, plan);
    if (!problem.empty()) rec.errors.push_back(problem);
  }
  for (const char* repeat : {"OPEN/repeat", "LOAD/repeat"}) {
    auto it = traces.find(repeat);
    if (it == traces.end()) continue;
    std::string problem = trace_problem(repeat, it->second, plan);
    if (!problem.empty()) rec.errors.push_back(problem);
  }
  if (!rec.errors.empty()) return rec;

  const std::vector<Reading>& open = traces.at("OPEN");
  const std::vector<Reading>& load = traces.at("LOAD");
  const std::vector<Reading>* shrt = recipe.calibration.use_short ? &traces.at("SHORT") : nullptr;
  const std::size_t n = plan.size();

  // Level sanity: OPEN and SHORT should both read near the full-reflection level.
  const double expected = expected_reflection_dbm(recipe.source.power_dbm, station);
  check_level("OPEN", open, expected, limits.level_tolerance_db, rec);
  if (shrt) check_level("SHORT", *shrt, expected, limits.level_tolerance_db, rec);

  // Reference and its spread.
  rec.reference_dbm.resize(n);
  std::size_t spread_at = 0;
  double spread = 0;
  for (std::size_t i = 0; i < n; ++i) {
    if (shrt) {
      rec.reference_dbm[i] = (open[i].raw_dbm + (*shrt)[i].raw_dbm) / 2;
      const double d = std::fabs(open[i].raw_dbm - (*shrt)[i].raw_dbm);
      if (d > spread) {
        spread = d;
        spread_at = i;
      }
    } else {
      rec.reference_dbm[i] = open[i].raw_dbm;
    }
  }
  if (shrt && spread > limits.max_open_short_spread_db) {
    // With 20 dB directivity the anti-phase ripple gives at most ~1.7 dB between OPEN and SHORT
    // (20·log10(1 ± 0.1): +0.83 / −0.92 dB); a larger gap is a bad, loose or swapped standard.
    rec.errors.push_back(fmt::format(
        "OPEN and SHORT differ by {:.1f} dB at {} (more than {:.0f} dB): a standard is bad or loose, or one of them is "
        "really the LOAD",
        spread, format_mhz(open[spread_at].frequency_hz), limits.max_open_short_spread_db));
  }
  if (!shrt) {
    rec.warnings.push_back(
        "reference from the OPEN alone: it carries the uncompensated directivity ripple (about \u00b10.3 dB at 30 dB "
        "directivity, 20\u00b7log10(1 \u00b1 0.032)); measure the SHORT too for a better reference");
  }

  // Directivity from the LOAD.
  rec.directivity_db.resize(n);
  rec.min_directivity_db = kInf;
  std::size_t dmin_at = 0;
  rec.noise_margin_db = kInf;
  std::size_t noise_at = 0;
  for (std::size_t i = 0; i < n; ++i) {
    rec.directivity_db[i] = rec.reference_dbm[i] - load[i].raw_dbm;
    if (rec.directivity_db[i] < rec.min_directivity_db) {
      rec.min_directivity_db = rec.directivity_db[i];
      dmin_at = i;
    }
    const double margin = load[i].raw_dbm - station.noise_floor_dbm;
    if (margin < rec.noise_margin_db) {
      rec.noise_margin_db = margin;
      noise_at = i;
    }
  }
  if (rec.min_directivity_db < limits.min_directivity_db) {
    rec.errors.push_back(fmt::format(
        "the LOAD is only {:.1f} dB below the reference at {} (directivity under {:.0f} dB): the LOAD is bad or not "
        "connected, or the OPEN/SHORT were measured on something else",
        rec.min_directivity_db, format_mhz(load[dmin_at].frequency_hz), limits.min_directivity_db));
  }
  if (rec.noise_margin_db < limits.min_noise_margin_db) {
    rec.warnings.push_back(fmt::format(
        "the LOAD reads only {:.1f} dB above the receiver noise floor ({:.1f} dBm) at {}: the directivity there is "
        "limited by noise and reads lower than the coupler's own (the bounds stay on the safe side)",
        rec.noise_margin_db, station.noise_floor_dbm, format_mhz(load[noise_at].frequency_hz)));
  }
  // The uncertainty budget: directivity bound with the kit's LOAD residual, reference error
  // from the kit's OPEN/SHORT, measured reading noise, source match (uncertainty.hpp).
  BudgetInputs in;
  in.coverage_factor = recipe.coverage_factor;
  // The fixture's source match, or the recipe's when that is worse (a recipe may say its
  // adapters spoil the match; it can never make the fixture look better).
  in.source_match_db = std::min(station.source_match_db, recipe.source_match_db);
  in.noise_floor_dbm = station.noise_floor_dbm;
  // The DUT's reflection travels the test-port cable twice; the leakage path inside the coupler
  // adds up to 1 ns more (common practice, no source): the relative rotation of the error terms.
  in.error_delay_s = 2 * station.test_port_delay_s + 1e-9;
  if (recipe.mode == SweepMode::fast_capture && station.frequency_offset_hz > 0) {
    in.frequency_offset_hz = station.frequency_offset_hz;
  }
  rec.kit_identity = station.kit.identity;
  rec.kit_serial = station.kit.serial;
  rec.budget = build_budget(recipe, traces, rec.reference_dbm, station.kit, in, rec.warnings);
  double worst_bound = 0;
  std::size_t worst_at = 0;
  for (std::size_t i = 0; i < n; ++i) {
    if (rec.budget.directivity_bound[i] > worst_bound) {
      worst_bound = rec.budget.directivity_bound[i];
      worst_at = i;
    }
  }
  if (worst_bound >= std::pow(10.0, -10.0 / 20)) {
    rec.errors.push_back(fmt::format(
        "with the kit's LOAD residual and the reading noise the directivity bound is only {:.1f} dB at {}: no return "
        "loss can be verified; use a better coupler or LOAD",
        -20 * std::log10(worst_bound), format_mhz(plan[worst_at])));
  }
  // The directivity vector from the first two known mismatches measured (MEASUREMENT.md 6.5).
  if (rec.errors.empty() && rec.budget.mismatch.size() >= 2) {
    const MismatchStandard& ma = rec.budget.mismatch[0];
    const MismatchStandard& mb = rec.budget.mismatch[1];
    const double conn = rec.budget.coverage_factor * rec.budget.connection;
    MismatchModels models;
    models.tolerance_a = mismatch_tolerance(ma.magnitude, ma.magnitude_tolerance, ma.phase_tolerance_rad, conn);
    models.tolerance_b = mismatch_tolerance(mb.magnitude, mb.magnitude_tolerance, mb.phase_tolerance_rad, conn);
    for (double f : plan) {
      models.gamma_a.push_back(mismatch_gamma(ma, f));
      models.gamma_b.push_back(mismatch_gamma(mb, f));
    }
    add_directivity_vector(rec.budget, rec, station.kit, traces.at(ma.name), traces.at(mb.name), models, rec.warnings);
  }
  rec.valid = rec.errors.empty();
  return rec;
}

CalibrationState calibration_due(const CalibrationRecord* cal, const Recipe& recipe, double now_unix_s,
                                 double created_unix_s, std::optional<double> temperature_c, double frequency_offset_hz,
                                 const StationCapability* station) {
  if (!cal) return {true, "no calibration yet"};
  if (!cal->valid) {
    if (cal->errors.empty()) return {true, fmt::format("the last calibration ({}) was not valid", cal->id)};
    return {true, fmt::format("the last calibration ({}) was not valid: {}", cal->id, cal->errors.front())};
  }
  if (cal->budget.frequency_hz.size() != cal->reference_dbm.size()) {
    return {true, fmt::format("calibration {} has no uncertainty budget (made by an older version)", cal->id)};
  }
  // What the calibration was made for against what this recipe needs: the sweep mode (a record
  // whose budget has no frequency-offset term was made by a step sweep) and the plan's points.
  const bool cal_fast = cal->budget.frequency_offset_hz > 0;
  const bool recipe_fast = recipe.mode == SweepMode::fast_capture;
  const bool other_recipe = !cal->recipe.content_hash.empty() && !recipe.content_hash.empty() &&
                            cal->recipe.content_hash != recipe.content_hash;
  const std::vector<double> plan = plan_frequencies(recipe);
  std::vector<double> made_plan;
  if (auto open = cal->traces.find("OPEN"); open != cal->traces.end()) {
    for (const Reading& r : open->second) made_plan.push_back(r.frequency_hz);
  }
  bool same_plan = made_plan.size() == plan.size();
  for (std::size_t i = 0; same_plan && i < plan.size(); ++i) same_plan = same_frequency(made_plan[i], plan[i]);
  // The reference must exist at every point we will measure.
  const bool complete = cal->reference_dbm.size() == made_plan.size() && cal->directivity_db.size() == made_plan.size();

  if (made_plan.empty()) {
    return {true, fmt::format("calibration {} has no OPEN trace to compare this recipe's frequencies with", cal->id)};
  }
  if (recipe_fast && !cal_fast && !other_recipe && same_plan) {
    // This recipe's own calibration, stored before fast-capture budgets carried the offset term:
    // its readings may be half a bin off and nothing in its bounds says so.
    return {true, fmt::format("calibration {} has no frequency-offset term for fast capture (made by an older "
                              "version)", cal->id)};
  }
  const std::string made_for = cal->recipe.name.empty()
                                   ? std::string()
                                   : fmt::format(" (recipe {} {})", cal->recipe.name, cal->recipe.version);
  if ((other_recipe && cal_fast != recipe_fast) || (recipe_fast && !cal_fast) || !same_plan) {
    // Name only what differs, the calibration's side first.
    std::vector<std::string> then, now;
    auto mode = [](bool fast) { return std::string(fast ? "fast capture" : "a step sweep"); };
    if (cal_fast != recipe_fast) {
      then.push_back(mode(cal_fast));
      now.push_back(mode(recipe_fast));
    }
    if (!same_plan && !plan.empty()) {
      auto span = [](const std::vector<double>& f) {
        return fmt::format("frequencies {} to {}", format_mhz(f.front(), 3), format_mhz(f.back(), 3));
      };
      const bool same_count = made_plan.size() == plan.size();
      const bool same_span = same_frequency(made_plan.front(), plan.front()) && same_frequency(made_plan.back(), plan.back());
      if (!same_count) {
        then.push_back(fmt::format("a plan of {} points", made_plan.size()));
        now.push_back(fmt::format("{} points", plan.size()));
      }
      if (!same_span) {
        then.push_back(span(made_plan));
        now.push_back(span(plan));
      }
      if (same_count && same_span) {
        std::size_t i = 0;
        while (i < plan.size() && same_frequency(made_plan[i], plan[i])) ++i;
        then.push_back(fmt::format("point {} at {}", i + 1, format_mhz(made_plan[i], 3)));
        now.push_back(fmt::format("{} there", format_mhz(plan[i], 3)));
      }
    }
    auto join = [](const std::vector<std::string>& parts) {
      std::string out;
      for (const auto& p : parts) out += (out.empty() ? "" : ", ") + p;
      return out;
    };
    std::string text = fmt::format("calibration {}{} was made for {}", cal->id, made_for, join(then));
    if (!now.empty()) text += fmt::format("; this recipe uses {}", join(now));
    return {true, text};
  }
  if (!complete) {
    return {true, fmt::format("calibration {} is incomplete: {} reference and {} directivity values for {} points",
                              cal->id, cal->reference_dbm.size(), cal->directivity_db.size(), plan.size())};
  }
  if (recipe_fast && frequency_offset_hz >= 0 && cal->budget.frequency_offset_hz < frequency_offset_hz * (1 - 1e-9)) {
    return {true, fmt::format("calibration {} bounds readings up to {:.4g} Hz off their frequency; the station's fast "
                              "capture now allows {:.4g} Hz (was the start-pulse cable removed?)",
                              cal->id, cal->budget.frequency_offset_hz, frequency_offset_hz)};
  }
  if (station) {
    // The budget froze the fixture's figures when it was made; a config corrected since to a worse
    // match or a longer cable needs wider bounds than it holds. (A better figure leaves it safe.)
    const double now_match = rho_from_db(std::min(station->source_match_db, recipe.source_match_db));
    if (now_match > cal->budget.source_match * (1 + 1e-6) + 1e-12) {
      return {true, fmt::format("calibration {} assumed a test-port source match of {:.1f} dB; the station config now "
                                "states {:.1f} dB",
                                cal->id, -20 * std::log10(std::max(cal->budget.source_match, 1e-12)),
                                -20 * std::log10(now_match))};
    }
    const double now_delay = 2 * station->test_port_delay_s + 1e-9;
    if (now_delay > cal->budget.error_delay_s * (1 + 1e-6) + 1e-15) {
      return {true, fmt::format("calibration {} assumed a test-port delay of {:.2f} ns; the station config now states "
                                "{:.2f} ns",
                                cal->id, (cal->budget.error_delay_s - 1e-9) / 2 * 1e9, station->test_port_delay_s * 1e9)};
    }
    // The offset line's match as the station now takes it: a line fitted by hand (no switch arm
    // any more) carries its connection's repeatability too (station_capability.cpp).
    if (recipe.offset_pair && cal->budget.offset_line && station->kit.offset_line &&
        station->kit.offset_line->match > cal->budget.offset_line->match * (1 + 1e-6) + 1e-12) {
      return {true, fmt::format("calibration {} took the offset line's match as {:.1f} dB; the station now takes "
                                "{:.1f} dB{}",
                                cal->id, -20 * std::log10(std::max(cal->budget.offset_line->match, 1e-12)),
                                -20 * std::log10(station->kit.offset_line->match),
                                station->offset_line_by_hand ? " (the line is fitted by hand: its connection is made "
                                                               "anew for every unit)"
                                                             : "")};
    }
  }
  if (other_recipe) {
    // Same sweep mode and plan; some other setting of the recipe file changed.
    if (cal->recipe.name == recipe.name && cal->recipe.version == recipe.version) {
      return {true, fmt::format("calibration {} was made for an earlier content of recipe {} {} (same name, version "
                                "and sweep plan; the file has changed since)", cal->id, recipe.name, recipe.version)};
    }
    return {true, fmt::format("calibration {}{} was made for another recipe with the same sweep plan; this one is {} {}",
                              cal->id, made_for, recipe.name, recipe.version)};
  }
  const double max_age = cal->max_age_s > 0 ? cal->max_age_s : recipe.calibration.max_age_s;
  const double age = now_unix_s - created_unix_s;
  if (age > max_age) {
    return {true, fmt::format("calibration is {:.1f} h old (limit {:.1f} h)", age / 3600, max_age / 3600)};
  }
  if (age < -60) return {true, "calibration is dated in the future: check the station clock"};
  const int max_units = cal->max_units > 0 ? cal->max_units : recipe.calibration.max_units;
  if (cal->units_since >= max_units) {
    return {true, fmt::format("{} units tested since calibration (limit {})", cal->units_since, max_units)};
  }
  const double max_dt = cal->max_temperature_change_c > 0 ? cal->max_temperature_change_c
                                                          : recipe.calibration.max_temperature_change_c;
  if (temperature_c && cal->temperature_c) {
    const double dt = std::fabs(*temperature_c - *cal->temperature_c);
    if (dt > max_dt) {
      return {true, fmt::format("temperature changed by {:.1f} \u00b0C since calibration ({:.1f} \u2192 {:.1f} \u00b0C, "
                                "limit {:.1f} \u00b0C)",
                                dt, *cal->temperature_c, *temperature_c, max_dt)};
    }
  }
  return {false, ""};
}

bool check_standard_drifted(const CalibrationRecord& cal, const std::string& standard,
                            const std::vector<Reading>& remeasured, double limit_db, std::string* why) {
  auto say = [&](std::string text) {
    if (why) *why = std::move(text);
    return true;
  };
  auto it = cal.traces.find(standard);
  if (it == cal.traces.end()) return say(fmt::format("the calibration has no {} trace to compare with", standard));
  const std::vector<Reading>& ref = it->second;
  if (ref.size() != remeasured.size()) {
    return say(fmt::format("the {} check has {} readings, the calibration {}", standard, remeasured.size(), ref.size()));
  }
  std::size_t worst = 0;
  double drift = 0;
  for (std::size_t i = 0; i < ref.size(); ++i) {
    if (!same_frequency(ref[i].frequency_hz, remeasured[i].frequency_hz)) {
      return say(fmt::format("the {} check reading {} is at {}, the calibration's at {}", standard, i,
                             format_mhz(remeasured[i].frequency_hz, 3), format_mhz(ref[i].frequency_hz, 3)));
    }
    if (!std::isfinite(remeasured[i].raw_dbm)) {
      return say(fmt::format("the {} check reading at {} is not a number", standard, format_mhz(ref[i].frequency_hz)));
    }
    const double d = std::fabs(remeasured[i].raw_dbm - ref[i].raw_dbm);
    if (d > drift) {
      drift = d;
      worst = i;
    }
  }
  if (drift > limit_db) {
    return say(fmt::format("the {} check standard moved {:.2f} dB at {} since calibration (limit {:.2f} dB)", standard,
                           drift, format_mhz(ref[worst].frequency_hz), limit_db));
  }
  if (why) why->clear();
  return false;
}

CalibrationRecord as_when_used(CalibrationRecord cal) {
  if (cal.valid || cal.errors.empty()) return cal;
  for (const std::string& e : cal.errors) {
    if (e.rfind("invalidated at ", 0) != 0) return cal;
  }
  cal.errors.clear();
  cal.valid = true;
  return cal;
}

}  // namespace echoline::core
