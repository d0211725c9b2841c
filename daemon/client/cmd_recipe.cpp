// `echoline recipe check FILE` and `echoline dry-run RECIPE`: offline, nothing is sent to any
// instrument (dry-run --select asks the daemon to load the recipe).
#include <cmath>
#include <filesystem>
#include <iostream>

#include <fmt/format.h>

#include "daemon/client/capability.hpp"
#include "daemon/client/cli.hpp"
#include "daemon/client/commands.hpp"
#include "daemon/client/exit_codes.hpp"
#include "daemon/core/centring_prediction.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/mask_prediction.hpp"
#include "daemon/core/recipe_check.hpp"
#include "daemon/core/recipe_loader.hpp"
#include "drivers/config_error.hpp"
#include "drivers/jsonc.hpp"

namespace echoline::client {

namespace {

constexpr const char* kRecipeHelp =
    "usage: echoline recipe check FILE [--station CONFIG]\n\n"
    "Loads the recipe and the station's instrument profiles and checks the recipe against what\n"
    "the station can do: equipment safety (worst-case power at the receiver against its maximum\n"
    "safe input), frequency and level ranges, and whether the station can verify the limits\n"
    "(directivity, noise floor). Prints each finding as FILE:LINE: KEY: error|warning: MESSAGE.\n"
    "Offline: no daemon and no instrument is involved.\n\n"
    "  --station CONFIG   station config (default $ECHOLINE_CONFIG, else config/station.jsonc,\n"
    "                     else " ECHOLINE_INSTALLED_STATION_CONFIG ")\n\n"
    "exit: 0 no errors (warnings allowed), 1 the recipe has errors or does not load,\n"
    "      2 usage or station config error\n";

constexpr const char* kDryRunHelp =
    "usage: echoline dry-run RECIPE [--station CONFIG] [--select [connection options]]\n\n"
    "Shows what the recipe would do on this station without touching any instrument: the\n"
    "recipe check, the sweep plan (segments, points, frequencies), the source level and the\n"
    "worst-case power at the receiver, the calibration standards, and an estimate of the sweep\n"
    "time from the receiver settings (settling + k*span/RBW^2 per reading, k = 2.5; instrument\n"
    "command overhead not included, so real sweeps take longer). For a fast-capture recipe: the\n"
    "plan the station chooses (RBW, source ramp, receiver sweep, arrangement), why, and the\n"
    "expected capture time.\n\n"
    "  --station CONFIG   station config (default $ECHOLINE_CONFIG, else config/station.jsonc,\n"
    "                     else " ECHOLINE_INSTALLED_STATION_CONFIG ")\n"
    "  --select           then ask the running daemon to load the recipe (recipe.select, engineer\n"
    "                     role); the calibration stays valid only for the same sweep plan.\n"
    "                     To dry-run on the simulator, start echoline-sim and echolined on it.\n\n"
    "exit: 0 no errors, 1 the recipe has errors, 2 usage or config error, 3 daemon unreachable\n";

int line_of(const drivers::JsoncDocument* doc, const std::string& key) {
  if (doc == nullptr) return 0;
  try {
    return doc->line_of(nlohmann::json::json_pointer(key.empty() || key[0] != '/' ? "" : key));
  } catch (const std::exception&) {
    return 0;
  }
}

struct Checked {
  core::Recipe recipe;
  std::vector<core::CheckFinding> findings;
  core::StationCapability capability;
  bool errors = false;
};

// Loads and checks; prints findings. Throws CliExit(kExitNegative) when the recipe does not load.
Checked load_and_check(const std::string& file, const drivers::StationConfig& config) {
  Checked out;
  try {
    out.recipe = core::load_recipe(file);
  } catch (const drivers::ConfigError& e) {
    std::cout << e.what() << "\n";
    throw CliExit(kExitNegative, fmt::format("recipe check: {} does not load (1 error)", file));
  }
  std::optional<drivers::JsoncDocument> doc;
  try {
    doc = drivers::JsoncDocument::load(file);
  } catch (const std::exception&) {
    doc.reset();
  }
  out.capability = station_capability(config, out.recipe);
  out.findings = core::check_recipe(out.recipe, out.capability);
  for (const auto& f : out.findings) {
    const int line = line_of(doc ? &*doc : nullptr, f.key);
    std::cout << fmt::format("{}{}: {}: {}: {}\n", file, line > 0 ? fmt::format(":{}", line) : "", f.key.empty() ? "/" : f.key,
                             f.severity, f.message);
  }
  out.errors = core::has_errors(out.findings);
  return out;
}

// The centring prediction in words (recipes with a resonance window and a nominal unit).
void print_centring(const core::Recipe& r, const core::StationCapability& cap, const char* indent = "") {
  auto p = core::predict_centring(r, cap);
  if (!p) return;
  std::cout << indent << fmt::format(
      "centring: the resonance can be placed to about \u00b1{:.2f} MHz on this station ({}); predicted inconclusive for "
      "the resonance window: {:.1f} % of {}",
      p->half_width_hz / 1e6, p->basis, 100 * p->inconclusive_fraction, p->of_all_units ? "all units" : "well-centred units");
  if (p->directivity_for_5_percent_db) {
    std::cout << fmt::format("; 5 % needs a coupler of {:.1f} dB directivity", *p->directivity_for_5_percent_db);
  }
  if (p->kit_gain_for_5_percent_db) {
    std::cout << fmt::format("; with the offset pair, 5 % needs the kit's line match, connection and LOAD each {:.1f} dB better",
                             *p->kit_gain_for_5_percent_db);
  }
  if (p->kit_gain_at_coupler_db) {
    std::cout << (*p->kit_gain_at_coupler_db == 0
                      ? std::string("; with the offset pair and the test port at the coupler (no test-port cable), 5 %")
                      : fmt::format("; with the offset pair and the test port at the coupler (no test-port cable), 5 % "
                                    "needs the kit {:.1f} dB better",
                                    *p->kit_gain_at_coupler_db));
  }
  std::cout << "\n";
}

// The mask's guard band in words: per segment, the readings that pass and that fail under
// guarded acceptance on this station, and the predicted shares when the recipe gives a nominal unit.
void print_mask(const core::Recipe& r, const core::StationCapability& cap, const char* indent = "") {
  if (r.rule != core::DecisionRule::guarded) return;
  auto p = core::predict_mask(r, cap);
  if (!p) return;
  for (const core::MaskGuard& g : p->guards) {
    // With the offset pair the thresholds are on the pair's estimate of the return loss.
    std::cout << indent << fmt::format("mask {} ≥ {:.1f} dB: passes when the {} is at least {}, fails below {:.1f} dB\n",
                                       core::format_frequency_range(g.start_hz, g.stop_hz), g.limit_db,
                                       r.offset_pair && cap.kit.offset_line ? "offset pair's return loss" : "reading",
                                       std::isfinite(g.pass_reading_db) ? fmt::format("{:.2f} dB", g.pass_reading_db)
                                                                        : std::string("(none can pass)"),
                                       g.fail_reading_db);
  }
  if (!p->have_unit) {
    // Say why there is no share when the recipe did describe a unit (e.g. no monopole fits it).
    if (r.nominal.q || r.nominal.bandwidth_hz) std::cout << indent << "mask: no predicted share: " << p->basis << "\n";
    return;
  }
  const std::string margin = std::isfinite(p->nominal_margin_db)
                                 ? fmt::format("the nominal unit's true return loss lies {:.1f} dB {} the pass reading",
                                               std::fabs(p->nominal_margin_db), p->nominal_margin_db >= 0 ? "above" : "below")
                                 : std::string("no reading of the nominal unit can pass");
  std::cout << indent << fmt::format("mask: predicted {:.1f} % pass, {:.1f} % inconclusive ({:.1f}-{:.1f} % as the coupler's "
                                     "leakage phase falls), {:.1f} % fail of {} ({}); {}",
                                     100 * p->pass_fraction, 100 * p->inconclusive_fraction, 100 * p->inconclusive_low,
                                     100 * p->inconclusive_high, 100 * p->fail_fraction,
                                     p->of_all_units ? "all units" : "the nominal unit over the leakage phases", p->basis,
                                     margin);
  if (p->directivity_for_5_percent_db) {
    std::cout << fmt::format("; 5 % inconclusive needs a coupler of {:.1f} dB directivity", *p->directivity_for_5_percent_db);
  }
  std::cout << "\n";
}

int count(const std::vector<core::CheckFinding>& fs, const char* severity) {
  int n = 0;
  for (const auto& f : fs) n += f.severity == severity;
  return n;
}

// Step sweep: the time estimate from the receiver settings.
void print_step_estimate(const core::Recipe& r, std::size_t points) {
  const double vbw = r.receiver.vbw_hz > 0 ? r.receiver.vbw_hz : r.receiver.rbw_hz;
  // Swept-analyzer time per reading: ST = k*span/RBW^2, with k from 2 to 3 for analog,
  // near-Gaussian resolution filters (common practice); we take k = 2.5. VBW < RBW lengthens it
  // by RBW/VBW (from memory).
  double per_reading = 0;
  if (r.receiver.span_hz > 0 && r.receiver.rbw_hz > 0) {
    per_reading = 2.5 * r.receiver.span_hz / (r.receiver.rbw_hz * r.receiver.rbw_hz);
    if (vbw < r.receiver.rbw_hz) per_reading *= r.receiver.rbw_hz / vbw;
  }
  const double per_point = r.source.settle_s + per_reading * std::max(r.receiver.averages, 1);
  const double sweep = per_point * static_cast<double>(points);
  // The offset pair sweeps each unit twice (on the DUT arm, then through the offset line).
  const int sweeps = r.offset_pair ? 2 : 1;
  std::cout << fmt::format("  estimated sweep time {:.2f} s per unit ({}{:.4f} s per point, command overhead not included)\n",
                           sweep * sweeps, sweeps == 2 ? "two sweeps with the offset pair, " : "", per_point);
  std::cout << fmt::format("  estimated calibration {:.2f} s of sweeps ({} standards, 2 repeats)\n",
                           sweep * (r.calibration.use_short ? 5 : 4), r.calibration.use_short ? 3 : 2);
}

// Fast capture: the plan the station chose, why, and the expected time.
void print_fast_capture_plan(const drivers::StationConfig& config, const core::Recipe& r, int calibration_captures) {
  auto plan = fast_capture_plan(config, r);
  if (!plan) {
    std::cout << "  fast capture: no plan: " << plan.error().message << "\n";
    return;
  }
  const core::FastCapturePlan& p = *plan;
  std::cout << fmt::format("  fast capture plan: {}\n", core::to_string(p.arrangement));
  std::cout << fmt::format("    receiver RBW {}, {} bins {:.6f} to {:.6f} MHz ({} plan points and one bin beyond each end), "
                           "sweep {:.4g} s{}\n",
                           core::format_frequency(p.rbw_hz), p.axis.points, p.axis.start_hz / 1e6, p.axis.stop_hz / 1e6,
                           p.axis.bins_on_plan ? fmt::format("{}", p.axis.points - 2) : "interpolated",
                           p.receiver_sweep_s, p.receiver_sweeps > 1 ? fmt::format(" x {} max-hold sweeps", p.receiver_sweeps) : "");
  std::cout << fmt::format("    source ramp {:.6f} to {:.6f} MHz in {:.4g} ms, repeating\n", p.source_start_hz / 1e6,
                           p.source_stop_hz / 1e6, p.source_sweep_s * 1e3);
  if (p.triggered) {
    std::cout << fmt::format("    receiver sweep starts {:.4f} ms after the source's ramp-start pulse (fixture.start_pulse_cable): "
                             "each reading within {:.3g} Hz of its frequency\n",
                             p.trigger_delay_s * 1e3, p.frequency_offset_hz);
  } else {
    std::cout << fmt::format("    receiver sweep starts at a ramp phase left to chance: each reading up to {:.4g} MHz (half a bin) "
                             "off its frequency, which the budget bounds{}\n",
                             p.frequency_offset_hz / 1e6,
                             config.fixture.start_pulse_cable ? "" : "; a start-pulse cable would remove this (fixture.start_pulse_cable)");
  }
  std::cout << fmt::format("    why: {}\n", p.reason);
  std::cout << fmt::format("  expected capture {:.3f} s per unit (recipe limit {} s; command overhead not included)\n",
                           p.capture_s, r.fast_capture.max_capture_s);
  std::cout << fmt::format("  estimated calibration {:.2f} s of captures ({} captures)\n", p.capture_s * calibration_captures,
                           calibration_captures);
}

}  // namespace

int cmd_recipe(const Argv& argv) {
  Args args(argv, "recipe", {"--station", "--config"}, {"--help"}, 2);
  if (args.flag("--help")) {
    std::cout << kRecipeHelp;
    return kExitOk;
  }
  if (args.positional().size() != 2 || args.positional()[0] != "check") args.usage_error("expected: recipe check FILE");
  const std::string file = args.positional()[1];
  const drivers::StationConfig config = *find_station_config(args, true);
  Checked c = load_and_check(file, config);
  print_centring(c.recipe, c.capability);
  print_mask(c.recipe, c.capability);
  if (c.recipe.mode == core::SweepMode::fast_capture && c.capability.frequency_offset_hz > 0) {
    // Not a finding (the budget bounds it), but the engineer should know the capture runs free.
    std::cout << fmt::format("fast capture: the receiver's sweep starts at a ramp phase left to chance, so each reading "
                             "may be up to {:.4g} MHz (half a bin) off its frequency; the budget bounds that, at the "
                             "cost of wider intervals on steep slopes.{}\n",
                             c.capability.frequency_offset_hz / 1e6,
                             config.fixture.start_pulse_cable
                                 ? std::string()
                                 : " A cable from the generator's ramp-start pulse to the analyzer's trigger input "
                                   "(fixture.start_pulse_cable) removes it.");
  }
  std::cout << fmt::format("recipe check: {} {} on station {}: {} error{}, {} warning{}\n", c.recipe.name, c.recipe.version,
                           config.station, count(c.findings, "error"), count(c.findings, "error") == 1 ? "" : "s",
                           count(c.findings, "warning"), count(c.findings, "warning") == 1 ? "" : "s");
  return c.errors ? kExitNegative : kExitOk;
}

int cmd_dry_run(const Argv& argv) {
  std::set<std::string> values = kConnectionOptions;
  values.insert("--station");
  Args args(argv, "dry-run", values, {"--help", "--select"}, 1);
  if (args.flag("--help")) {
    std::cout << kDryRunHelp << "\n" << kConnectionHelp;
    return kExitOk;
  }
  if (args.positional().size() != 1) args.usage_error("expected: dry-run RECIPE");
  const std::string file = args.positional()[0];
  const drivers::StationConfig config = *find_station_config(args, true);
  std::cout << "Recipe check:\n";
  Checked c = load_and_check(file, config);
  if (c.findings.empty()) std::cout << "  no findings\n";
  const core::Recipe& r = c.recipe;
  const auto freqs = core::plan_frequencies(r);
  std::cout << fmt::format("\nPlan of {} {} ({} acceptance), nothing sent to any instrument:\n", r.name, r.version,
                           core::to_string(r.rule));
  for (const auto& seg : r.segments) {
    std::cout << fmt::format("  segment {:.3f} - {:.3f} MHz, {} points\n", seg.start_hz / 1e6, seg.stop_hz / 1e6, seg.points);
  }
  std::cout << fmt::format("  {} frequencies in all{}\n", freqs.size(),
                           freqs.size() > 1 ? fmt::format(", {:.3f} to {:.3f} MHz", freqs.front() / 1e6, freqs.back() / 1e6) : "");
  std::cout << fmt::format("  source {:.1f} dBm{}, settle {:.4f} s{}\n", r.source.power_dbm,
                           r.mode == core::SweepMode::fast_capture ? " ramped" : " CW", r.source.settle_s,
                           r.mode == core::SweepMode::fast_capture ? " before the capture" : " per frequency");
  const double vbw = r.receiver.vbw_hz > 0 ? r.receiver.vbw_hz : r.receiver.rbw_hz;
  if (r.mode == core::SweepMode::fast_capture) {
    std::cout << fmt::format("  receiver attenuation {}, reference level {} (RBW and sweep: the plan below)\n",
                             r.receiver.attenuation_db < 0 ? std::string("auto") : fmt::format("{:.0f} dB", r.receiver.attenuation_db),
                             r.receiver.reference_level_dbm ? fmt::format("{:.1f} dBm", *r.receiver.reference_level_dbm)
                                                            : std::string("left to the instrument"));
  } else {
    std::cout << fmt::format("  receiver RBW {:.0f} Hz, VBW {:.0f} Hz, span {:.0f} Hz, {} reading{} per point\n", r.receiver.rbw_hz,
                             vbw, r.receiver.span_hz, r.receiver.averages, r.receiver.averages == 1 ? "" : "s");
  }
  const double worst = core::worst_case_receiver_dbm(r.source.power_dbm, c.capability);
  std::cout << fmt::format("  worst-case power at the receiver {:.1f} dBm (maximum safe input {:.1f} dBm)\n", worst,
                           c.capability.receiver_max_safe_input_dbm);
  std::cout << "  calibration standards: " << (r.calibration.use_short ? "OPEN, SHORT, LOAD" : "OPEN, LOAD")
            << " (OPEN and LOAD swept twice: the repeat measures the reading noise)\n";
  if (r.offset_pair && c.capability.kit.offset_line) {
    const core::OffsetLine& l = *c.capability.kit.offset_line;
    std::cout << fmt::format("  offset pair: each unit swept again {}, through the kit's line "
                             "({:.1f} ± {:.1f} ps, {:.2f} ± {:.2f} dB, match {:.1f} dB{})\n",
                             c.capability.offset_line_by_hand ? "with the line fitted by the operator when prompted"
                                                              : "on the switch's DUT-OFFSET arm",
                             l.delay_s * 1e12, l.delay_tolerance_s * 1e12, l.loss_db, l.loss_tolerance_db,
                             -20 * std::log10(l.match),
                             c.capability.offset_line_by_hand ? " with its connection made anew each time" : "");
  }
  std::cout << fmt::format("  calibration kit: {} serial {}\n", c.capability.kit.identity, c.capability.kit.serial);
  print_centring(r, c.capability, "  ");
  print_mask(r, c.capability, "  ");
  if (r.mode == core::SweepMode::fast_capture) {
    print_fast_capture_plan(config, r, c.recipe.calibration.use_short ? 5 : 4);
  } else {
    print_step_estimate(r, freqs.size());
  }
  if (c.errors) {
    std::cout << "\nThe recipe has errors: it cannot run on this station.\n";
    return kExitNegative;
  }
  if (args.flag("--select")) {
    auto api = connect_daemon(args, "engineer", "echoline dry-run");
    const std::string abs = std::filesystem::absolute(file).string();
    ApiReply reply = require_link(api->call("recipe.select", {{"path", abs}}), "recipe.select");
    require_ok(reply, "recipe.select");
    std::cout << "\nThe daemon now runs " << abs << "\n";
  }
  return kExitOk;
}

}  // namespace echoline::client
