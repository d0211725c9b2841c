// Recipe against station capability (recipe_check.hpp).
#include "daemon/core/recipe_check.hpp"

#include "daemon/core/centring_prediction.hpp"
#include "daemon/core/mask_prediction.hpp"

#include <algorithm>
#include <cmath>

#include <fmt/format.h>

#include "daemon/core/fast_capture_plan.hpp"
#include "daemon/core/frequency_text.hpp"
#include "daemon/core/instrument_needs.hpp"
#include "daemon/core/offset_pair_check.hpp"

namespace echoline::core {

namespace {
// What the offset pair's kit and fixture would need for 5 % of units inconclusive (empty when no
// advice is given).
std::string pair_kit_advice(const CentringPrediction& p) {
  const auto kit = [](double db) {
    return fmt::format("a kit whose line match, connection repeatability and LOAD are each {:.1f} dB better", db);
  };
  std::string at_coupler;
  if (p.kit_gain_at_coupler_db) {
    at_coupler = *p.kit_gain_at_coupler_db == 0
                     ? std::string("the test port moved to the coupler (no test-port cable) would")
                     : fmt::format("with the test port at the coupler (no test-port cable), {} would",
                                   kit(*p.kit_gain_at_coupler_db));
  }
  if (p.kit_gain_for_5_percent_db) {
    return fmt::format("; with the offset pair, {} would{}", kit(*p.kit_gain_for_5_percent_db),
                       at_coupler.empty() ? std::string() : "; " + at_coupler);
  }
  return at_coupler.empty() ? std::string() : "; with the offset pair, " + at_coupler;
}
}  // namespace
namespace {

// Rule of thumb (common practice, no source): directivity should exceed the RL to be
// verified by at least 10 dB (margin 10 dB -> -2.39/+3.30 dB error).
constexpr double kDirectivityMarginDb = 10;
// A reading this far above the noise floor is disturbed by noise by less than ~0.4 dB
// (10·log10(1 + 10^-1)); common practice, no source.
constexpr double kNoiseMarginDb = 10;
// A single point sweep longer than this makes a run slow enough to mention (common practice).
constexpr double kSlowPointS = 0.5;

void add(std::vector<CheckFinding>& out, const char* sev, std::string key, std::string msg) {
  out.push_back(CheckFinding{sev, std::move(key), std::move(msg)});
}

}  // namespace

double worst_case_receiver_dbm(double source_power_dbm, const StationCapability& st) {
  // Full reflection at the test port reaches the receiver at P_src − coupling; the directivity
  // leakage (P_src − coupling − D) can add in phase: + 20·log10(1 + 10^(−D/20)).
  // Mainline and cable losses only lower the level: ignored for the worst case.
  return source_power_dbm - st.coupling_db + 20.0 * std::log10(1.0 + std::pow(10.0, -st.directivity_db / 20.0));
}

double expected_reflection_dbm(double source_power_dbm, const StationCapability& st) {
  return source_power_dbm - st.coupling_db - st.mainline_loss_db - 2 * st.cable_loss_db;
}

bool has_errors(const std::vector<CheckFinding>& findings) {
  return std::any_of(findings.begin(), findings.end(), [](const CheckFinding& f) { return f.severity == "error"; });
}

std::vector<CheckFinding> check_recipe(const Recipe& r, const StationCapability& st) {
  std::vector<CheckFinding> out;

  // Equipment safety first: the receiver's input can be damaged.
  const double p_rx = worst_case_receiver_dbm(r.source.power_dbm, st);
  if (p_rx > st.receiver_max_safe_input_dbm) {
    add(out, "error", "/source/power_dbm",
        fmt::format("worst-case power at the receiver input is {:.1f} dBm (source {:.1f} dBm, coupling {:.1f} dB, "
                    "full reflection with directivity leakage in phase, losses ignored), above its maximum safe "
                    "input of {:.1f} dBm: this could damage the receiver; lower the source power",
                    p_rx, r.source.power_dbm, st.coupling_db, st.receiver_max_safe_input_dbm));
  }
  if (r.source.power_dbm > st.source_max_power_dbm) {
    add(out, "error", "/source/power_dbm",
        fmt::format("source power {:.1f} dBm is above the source's maximum {:.1f} dBm", r.source.power_dbm,
                    st.source_max_power_dbm));
  }

  // Settings the instruments cannot make: only a recipe that asks for one is refused.
  for (const NeededOperation& need : needed_operations(r)) {
    const bool source = need.role == "source";
    if ((source ? st.source_lacks : st.receiver_lacks).count(std::string(need.operation)) == 0) continue;
    const bool mode = need.key == "/mode";
    add(out, "error", need.key,
        fmt::format("{}: needs the {} operation {}, which profile {} {}", need.what, need.role, need.operation,
                    source ? st.source_profile : st.receiver_profile,
                    mode ? "lacks; add it to the profile or use step mode"
                         : "declares absent (the instrument has none); leave " + need.key.substr(need.key.rfind('/') + 1) +
                               " out of the recipe"));
  }
  if (r.mode == SweepMode::fast_capture && !st.fast_capture_problem.empty()) {
    add(out, "error", "/fast_capture", st.fast_capture_problem);
  }
  if (r.mode == SweepMode::fast_capture && !st.start_pulse_problem.empty()) {
    add(out, "warning", "/fast_capture", st.start_pulse_problem);
  }

  // Mismatch standards come from the kit: a recipe cannot ask for what the kit lacks.
  if (r.calibration.use_mismatch && st.kit.mismatch.empty()) {
    const std::string kit = st.kit.source.empty()
                                ? std::string("the built-in conservative kit (the station config names no calibration_kit)")
                                : fmt::format("kit file {} ({})", st.kit.source, st.kit.identity);
    add(out, "error", "/calibration/use_mismatch",
        fmt::format("the recipe asks for the mismatch standards, but {} defines none; add a \"mismatch\" list to the "
                    "kit file (config/README.md, calibration kits) or set use_mismatch to false",
                    kit));
  }

  // The directivity vector is solved from two mismatch standards (MEASUREMENT.md §6.5): one alone
  // gives a circle, not a point; beyond two, only the first two are used.
  if (r.calibration.use_mismatch && st.kit.mismatch.size() == 1) {
    add(out, "error", "/calibration/use_mismatch",
        fmt::format("kit {} defines one mismatch standard ({}); the directivity vector needs two a quarter turn "
                    "apart; add the second to the kit's \"mismatch\" list or set use_mismatch to false",
                    st.kit.source.empty() ? st.kit.identity : st.kit.source, st.kit.mismatch.front().name));
  } else if (r.calibration.use_mismatch && st.kit.mismatch.size() > 2) {
    add(out, "warning", "/calibration/use_mismatch",
        fmt::format("kit {} defines {} mismatch standards: all are measured, the directivity vector is solved from "
                    "the first two ({} and {})",
                    st.kit.source.empty() ? st.kit.identity : st.kit.source, st.kit.mismatch.size(),
                    st.kit.mismatch[0].name, st.kit.mismatch[1].name));
  }

  // Fast capture over an unevenly spaced plan reads between bins and interpolates; the budget's
  // offset term bounds half a bin of a straight trace, not the interpolation error on a curve.
  if (r.mode == SweepMode::fast_capture) {
    const std::vector<double> plan = plan_frequencies(r);
    if (plan.size() >= 2 && !fast_capture_axis(plan).bins_on_plan) {
      add(out, "warning", "/segments",
          "fast capture over unevenly spaced points: the readings are interpolated between the receiver's bins, and "
          "the uncertainty budget does not bound the interpolation error on a curved trace; space the points evenly "
          "(one segment, or segments of equal step that meet)");
    }
  }

  // A calibration switch must have a position for every standard the recipe calibrates with.
  if (st.has_switch) {
    std::vector<std::pair<std::string, std::string>> needed = {{"OPEN", "/calibration"}, {"LOAD", "/calibration"}};
    if (r.calibration.use_short) needed.emplace_back("SHORT", "/calibration/use_short");
    if (r.calibration.use_mismatch) {
      for (const MismatchStandard& m : st.kit.mismatch) needed.emplace_back(m.name, "/calibration/use_mismatch");
    }
    for (const auto& [name, key] : needed) {
      if (st.switch_positions.count(name) > 0) continue;
      add(out, "error", key,
          fmt::format("the calibration switch (profile {}) has no position for the {} standard; add \"{}\" to the "
                      "profile's switch.positions",
                      st.switch_profile, name, name));
    }
    // A position that names nothing the station knows is most likely misspelt.
    for (const std::string& pos : st.switch_positions) {
      const bool known = pos == "OPEN" || pos == "SHORT" || pos == "LOAD" || pos == "DUT" || pos == kOffsetArm ||
                         std::any_of(st.kit.mismatch.begin(), st.kit.mismatch.end(),
                                     [&](const MismatchStandard& m) { return m.name == pos; });
      if (known) continue;
      add(out, "warning", "/calibration",
          fmt::format("the calibration switch (profile {}) has a position \"{}\" that names no standard of kit {} "
                      "and is not DUT: check its spelling",
                      st.switch_profile, pos, st.kit.source.empty() ? st.kit.identity : st.kit.source));
    }
  }

  check_offset_pair(r, st, out);

  // Frequency ranges: the source sets each point; the receiver looks span/2 either side.
  for (std::size_t i = 0; i < r.segments.size(); ++i) {
    const Segment& s = r.segments[i];
    const std::string key = fmt::format("/segments/{}", i);
    const std::string range = format_frequency_range(s.start_hz, s.stop_hz);
    if (s.start_hz < st.source_min_hz || s.stop_hz > st.source_max_hz) {
      add(out, "error", key,
          fmt::format("segment {} is outside the source's range {}", range,
                      format_frequency_range(st.source_min_hz, st.source_max_hz)));
    }
    const double half = r.receiver.span_hz / 2;
    if (s.start_hz - half < st.receiver_min_hz || s.stop_hz + half > st.receiver_max_hz) {
      add(out, "error", key,
          fmt::format("segment {} (with the {} span around each point) is outside the receiver's range {}", range,
                      format_frequency(r.receiver.span_hz), format_frequency_range(st.receiver_min_hz, st.receiver_max_hz)));
    }
  }

  // Can the station verify the limits?
  double max_limit = 0;
  for (const LimitSegment& m : r.limits.mask) max_limit = std::max(max_limit, m.min_return_loss_db);
  if (r.limits.min_bandwidth_hz) max_limit = std::max(max_limit, r.limits.bandwidth_threshold_db);
  if (st.directivity_db - max_limit < kDirectivityMarginDb) {
    add(out, "warning", "/limits/mask",
        fmt::format("directivity {:.1f} dB is only {:.1f} dB above the highest return-loss limit {:.1f} dB (want "
                    "at least {:.0f} dB): the uncertainty will be large and many units may be inconclusive",
                    st.directivity_db, st.directivity_db - max_limit, max_limit, kDirectivityMarginDb));
  }
  const double p_ref = expected_reflection_dbm(r.source.power_dbm, st);
  const double p_dut = p_ref - max_limit;
  if (p_dut - st.noise_floor_dbm < kNoiseMarginDb) {
    add(out, "warning", "/source/power_dbm",
        fmt::format("a unit just at the {:.1f} dB limit reads about {:.1f} dBm, only {:.1f} dB above the noise floor "
                    "{:.1f} dBm (want at least {:.0f} dB): raise the source power or narrow the RBW",
                    max_limit, p_dut, p_dut - st.noise_floor_dbm, st.noise_floor_dbm, kNoiseMarginDb));
  }
  const double p_load = p_ref - st.directivity_db;
  if (p_load - st.noise_floor_dbm < kNoiseMarginDb) {
    add(out, "warning", "/source/power_dbm",
        fmt::format("the LOAD is expected at about {:.1f} dBm, only {:.1f} dB above the noise floor {:.1f} dBm: the "
                    "calibrated directivity will be limited by noise and read low",
                    p_load, p_load - st.noise_floor_dbm, st.noise_floor_dbm));
  }
  if (r.receiver.reference_level_dbm && p_ref > *r.receiver.reference_level_dbm) {
    add(out, "warning", "/receiver/reference_level_dbm",
        fmt::format("OPEN/SHORT are expected at about {:.1f} dBm, above the reference level {:.1f} dBm: readings "
                    "may be compressed or clipped",
                    p_ref, *r.receiver.reference_level_dbm));
  }

  // RBW vs span.
  const ReceiverSettings& rx = r.receiver;
  if (rx.span_hz > 0 && rx.span_hz < 2 * rx.rbw_hz) {
    add(out, "warning", "/receiver/span_hz",
        fmt::format("span {} is narrower than twice the RBW {}: use zero span (0) or a span of several RBW",
                    format_frequency(rx.span_hz), format_frequency(rx.rbw_hz)));
  }
  if (rx.vbw_hz > 0 && rx.vbw_hz > rx.rbw_hz * 10) {
    add(out, "warning", "/receiver/vbw_hz",
        fmt::format("VBW {} is more than ten times the RBW {}: it does nothing but may not be accepted",
                    format_frequency(rx.vbw_hz), format_frequency(rx.rbw_hz)));
  }
  if (rx.span_hz > 0) {
    // Swept analyzer: ST ≈ k·span/RBW², k ≈ 2.5 for near-Gaussian RBW filters (common practice, from memory).
    const double st_point = 2.5 * rx.span_hz / (rx.rbw_hz * rx.rbw_hz) * rx.averages;
    if (st_point > kSlowPointS) {
      add(out, "warning", "/receiver/rbw_hz",
          fmt::format("each point needs about {:.2f} s of sweep (span {}, RBW {}, {} average(s)): widen the RBW or "
                      "narrow the span",
                      st_point, format_frequency(rx.span_hz), format_frequency(rx.rbw_hz), rx.averages));
    }
  }

  // Mask edges between plan points leave the true return loss at the edge unmeasured: a guarded
  // pass then rests on the neighbouring point (common practice, no source: sample the edges).
  const std::vector<double> plan = plan_frequencies(r);
  for (std::size_t i = 0; i < r.limits.mask.size(); ++i) {
    for (double edge : {r.limits.mask[i].start_hz, r.limits.mask[i].stop_hz}) {
      const bool on_plan = std::any_of(plan.begin(), plan.end(), [&](double f) { return std::fabs(f - edge) <= kLimitEdgeToleranceHz; });
      if (!on_plan) {
        add(out, "warning", fmt::format("/limits/mask/{}", i),
            fmt::format("the limit edge {} is not a plan frequency: the return loss exactly at the edge is not "
                        "measured; choose points or a step that put a point on it",
                        format_frequency(edge)));
      }
    }
  }

  // The mask under guarded acceptance: how many units will this station leave undecided
  // (mask_prediction.hpp)? Only with a production spread: without one the share is of the nominal
  // unit alone, and the guard band itself is printed by `recipe check` and `dry-run`.
  if (r.rule == DecisionRule::guarded) {
    if (auto p = predict_mask(r, st); p && p->have_unit && p->of_all_units && p->inconclusive_fraction > 0.10) {
      const MaskGuard* widest = nullptr;
      for (const MaskGuard& g : p->guards) {
        if (!widest || g.pass_reading_db - g.limit_db > widest->pass_reading_db - widest->limit_db) widest = &g;
      }
      std::string help = p->directivity_for_5_percent_db
                             ? fmt::format("a coupler of at least {:.1f} dB directivity would bring it to 5 %",
                                           *p->directivity_for_5_percent_db)
                             : std::string("no coupler would bring it to 5 % with this kit's LOAD and connection");
      const std::string need = std::isfinite(widest->pass_reading_db)
                                   ? fmt::format("reads at least {:.1f} dB", widest->pass_reading_db)
                                   : std::string("reads anything at all (no reading can pass)");
      add(out, "warning", fmt::format("/limits/mask/{}", widest->segment),
          fmt::format("on this station a unit passes the {:.1f} dB limit over {} only when it {}, and fails only "
                      "below {:.1f} dB: about {:.0f} % of units will come out inconclusive ({:.0f}-{:.0f} % as the "
                      "coupler's leakage phase falls); {}",
                      widest->limit_db, format_frequency_range(widest->start_hz, widest->stop_hz), need,
                      widest->fail_reading_db, 100 * p->inconclusive_fraction, 100 * p->inconclusive_low,
                      100 * p->inconclusive_high, help));
    }
  }

  // Centring: can this station decide the resonance window at all (centring_prediction.hpp)?
  if (r.limits.resonance_min_hz && r.rule == DecisionRule::guarded) {
    if (auto p = predict_centring(r, st)) {
      if (p->inconclusive_fraction > 0.10) {
        std::string help = p->directivity_for_5_percent_db
                               ? fmt::format("a coupler of at least {:.1f} dB directivity would bring it to 5 %",
                                             *p->directivity_for_5_percent_db)
                               : std::string("no coupler would bring it to 5 % with this kit's LOAD");
        help += pair_kit_advice(*p);
        add(out, "warning", "/limits/resonance_min_hz",
            fmt::format("this station places the resonance only to about \u00b1{:.1f} MHz, so about {:.0f} % of {} "
                        "will come out inconclusive for the {} window; {}, or express centring as return-loss mask "
                        "segments instead (judged point by point)",
                        p->half_width_hz / 1e6, 100 * p->inconclusive_fraction,
                        p->of_all_units ? "units" : "well-centred units",
                        format_frequency_range(*r.limits.resonance_min_hz, *r.limits.resonance_max_hz), help));
      }
    } else {
      add(out, "warning", "/nominal_unit",
          "a resonance window under guarded acceptance without nominal_unit {q or bandwidth_hz}: the station cannot "
          "predict how many units the window will leave inconclusive; give the nominal unit's Q or bandwidth");
    }
  }
  return out;
}

}  // namespace echoline::core
