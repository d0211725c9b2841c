// Recipe files (recipe_loader.hpp): JSON with comments, every mistake a ConfigError with file,
// line and key path. Key names follow the Recipe struct (recipe.hpp); frequencies (keys ending
// in _hz) may be numbers in Hz or strings with a unit ("902 MHz").
#include "daemon/core/recipe_loader.hpp"

#include <algorithm>
#include <cmath>
#include <fstream>
#include <iterator>
#include <sstream>

#include <fmt/format.h>

#include "daemon/core/frequency_text.hpp"
#include "daemon/core/sha256.hpp"
#include "drivers/config_error.hpp"
#include "drivers/jsonc.hpp"

namespace echoline::core {
namespace {

using drivers::JsoncDocument;
using drivers::JsonPointer;
using nlohmann::json;

constexpr int kMaxPoints = 100000;        // a whole plan; more is almost surely a typo
constexpr double kMinHz = 1.0;
constexpr double kMaxHz = 1e12;
// A frequency written without a unit is in Hz; below this it is far more likely a missing unit
// ("860" meant as 860 MHz) than a real frequency, so the unit must be written (a project choice:
// every sub-kilohertz setting of a recipe can still be given as "300 Hz").
constexpr double kBareNumberMinHz = 1e3;

JsonPointer ptr(const std::string& s) { return JsonPointer(s); }

class Loader {
 public:
  explicit Loader(const JsoncDocument& doc) : doc_(doc) {}

  Recipe load() {
    Recipe r;
    const JsonPointer root("");
    doc_.require_object(root);
    doc_.check_keys(root, {"name", "version", "description", "mode", "segments", "source", "receiver",
                           "calibration", "limits", "rule", "trim", "source_match_db", "setup", "teardown", "fast_capture",
                           "coverage_factor", "nominal_unit", "offset_pair"});
    r.name = doc_.require_string(ptr("/name"));
    if (r.name.empty()) doc_.fail(ptr("/name"), "must not be empty");
    r.version = doc_.require_string(ptr("/version"));
    if (r.version.empty()) doc_.fail(ptr("/version"), "must not be empty");
    r.description = doc_.string_or(ptr("/description"), "");
    r.mode = doc_.enum_or(ptr("/mode"), "step", {"step", "fast-capture"}) == "step" ? SweepMode::step
                                                                                     : SweepMode::fast_capture;
    load_segments(r);
    load_source(r);
    load_receiver(r);
    load_fast_capture(r);
    load_calibration(r);
    // Read each unit a second time through the kit's offset line (MEASUREMENT.md §12).
    r.offset_pair = doc_.bool_or(ptr("/offset_pair"), false);
    // ISO/IEC 17025 §7.1.3 (via ILAC-G8 §4.2.3): the decision rule is agreed before measuring,
    // so a recipe must state it.
    r.rule = doc_.require_enum(ptr("/rule"), {"simple", "guarded"}) == "simple" ? DecisionRule::simple
                                                                                : DecisionRule::guarded;
    load_limits(r);
    load_trim(r);
    // JCGM 100 §6.2–6.3: the expanded uncertainty U = k·u_c; k from 1 to 5 covers every use.
    r.coverage_factor = doc_.number_in(ptr("/coverage_factor"), r.coverage_factor, 1, 5, "");
    load_nominal(r);
    r.source_match_db = doc_.number_in(ptr("/source_match_db"), r.source_match_db, 1, 80, "dB");
    load_scpi(ptr("/setup"), r.setup);
    load_scpi(ptr("/teardown"), r.teardown);
    return r;
  }

 private:
  // A frequency: number in Hz or "<number> <unit>". A bare number below 1 kHz is refused here,
  // at its own key, before it can surface as some other key's range error.
  double frequency(const JsonPointer& at) const {
    const json& v = doc_.at(at);
    double hz = 0;
    bool unit_given = false;
    if (v.is_number()) {
      hz = v.get<double>();
    } else if (v.is_string()) {
      auto parsed = parse_frequency_text(v.get<std::string>());
      if (!parsed) doc_.fail(at, parsed.error().message);
      hz = parsed->hz;
      unit_given = parsed->unit_given;
    } else {
      doc_.fail(at, fmt::format("expected a frequency (a number in Hz or a string such as \"902 MHz\"), found {}",
                                v.type_name()));
    }
    if (!unit_given && std::isfinite(hz) && hz > 0 && hz < kBareNumberMinHz) {
      doc_.fail(at, fmt::format("{0} has no unit, so it reads as {0} Hz, below 1 kHz: did you mean \"{0} MHz\"? Write "
                                "the unit in a string (\"{0} kHz\", \"{0} MHz\", \"{0} GHz\"), or \"{0} Hz\" if "
                                "hertz are meant",
                                hz));
    }
    if (!std::isfinite(hz) || hz < kMinHz || hz > kMaxHz) {
      doc_.fail(at, fmt::format("frequency {} Hz is out of range; allowed 1 Hz to 1 THz", hz));
    }
    return hz;
  }

  std::optional<double> optional_frequency(const JsonPointer& at) const {
    if (!doc_.has(at) || doc_.at(at).is_null()) return std::nullopt;
    return frequency(at);
  }

  double positive(const JsonPointer& at, double fallback, std::string_view unit, double max) const {
    if (!doc_.has(at)) return fallback;
    double v = doc_.require_number(at, unit);
    if (!(v > 0) || v > max) doc_.fail(at, fmt::format("{} {} is out of range; must be above 0 and at most {} {}", v, unit, max, unit));
    return v;
  }

  void load_segments(Recipe& r) {
    const JsonPointer base("/segments");
    const json& arr = doc_.require_array(base);
    if (arr.empty()) doc_.fail(base, "needs at least one segment {start_hz, stop_hz, points | step_hz}");
    long total = 0;
    for (std::size_t i = 0; i < arr.size(); ++i) {
      const JsonPointer at = base / i;
      doc_.require_object(at);
      doc_.check_keys(at, {"start_hz", "stop_hz", "points", "step_hz"});
      Segment s;
      s.start_hz = frequency(at / "start_hz");
      s.stop_hz = frequency(at / "stop_hz");
      if (s.stop_hz < s.start_hz) {
        doc_.fail(at / "stop_hz", fmt::format("stop {} is below start {}", format_frequency(s.stop_hz),
                                              format_frequency(s.start_hz)));
      }
      const bool has_points = doc_.has(at / "points");
      const bool has_step = doc_.has(at / "step_hz");
      if (has_points == has_step) {
        doc_.fail(at, has_points ? "give either points or step_hz, not both"
                                 : "give either points or step_hz (neither is given)");
      }
      if (has_points) {
        const auto n = doc_.require_integer(at / "points");
        if (n < 1) doc_.fail(at / "points", fmt::format("{} points: must be 1 or more", n));
        if (n > kMaxPoints) doc_.fail(at / "points", fmt::format("{} points: at most {}", n, kMaxPoints));
        if (n == 1 && s.stop_hz > s.start_hz) {
          doc_.fail(at / "points", "1 point measures only the start; use 2 or more, or make stop equal to start");
        }
        if (n > 1 && s.stop_hz == s.start_hz) {
          doc_.fail(at / "points", fmt::format("{} points between equal start and stop; use 1", n));
        }
        s.points = static_cast<int>(n);
      } else {
        const double step = frequency(at / "step_hz");
        const double steps = (s.stop_hz - s.start_hz) / step;
        const double whole = std::round(steps);
        if (std::fabs(steps - whole) > 1e-6 * std::max(1.0, whole)) {
          doc_.fail(at / "step_hz", fmt::format("step {} does not divide {} into whole steps ({:.3f} steps)",
                                                format_frequency(step),
                                                format_frequency_range(s.start_hz, s.stop_hz), steps));
        }
        if (whole + 1 > kMaxPoints) {
          doc_.fail(at / "step_hz", fmt::format("step {} gives {:.0f} points: at most {}", format_frequency(step),
                                                whole + 1, kMaxPoints));
        }
        s.points = static_cast<int>(whole) + 1;
      }
      if (i > 0 && s.start_hz < r.segments.back().stop_hz) {
        doc_.fail(at / "start_hz", fmt::format("segment {} overlaps or comes before the previous segment {}; list "
                                               "segments in increasing frequency (they may share an end point)",
                                               format_frequency_range(s.start_hz, s.stop_hz),
                                               format_frequency_range(r.segments.back().start_hz,
                                                                      r.segments.back().stop_hz)));
      }
      total += s.points;
      if (total > kMaxPoints) doc_.fail(at, fmt::format("the plan has more than {} points", kMaxPoints));
      r.segments.push_back(s);
    }
  }

  void load_source(Recipe& r) {
    const JsonPointer at("/source");
    doc_.require_object(at);
    doc_.check_keys(at, {"power_dbm", "settle_s"});
    r.source.power_dbm = doc_.require_number(at / "power_dbm", "dBm");
    if (r.source.power_dbm < -150 || r.source.power_dbm > 30) {
      doc_.fail(at / "power_dbm", fmt::format("{} dBm is out of range; allowed -150 to 30 dBm", r.source.power_dbm));
    }
    r.source.settle_s = doc_.number_in(at / "settle_s", r.source.settle_s, 0, 10, "s");
  }

  void load_receiver(Recipe& r) {
    const JsonPointer at("/receiver");
    doc_.require_object(at);
    doc_.check_keys(at, {"rbw_hz", "vbw_hz", "span_hz", "reference_level_dbm", "attenuation_db", "averages"});
    ReceiverSettings& rx = r.receiver;
    rx.rbw_hz = frequency(at / "rbw_hz");
    // vbw_hz and span_hz may be 0 (0 = same as RBW; 0 = zero span).
    rx.vbw_hz = zero_or_frequency(at / "vbw_hz", rx.vbw_hz);
    rx.span_hz = zero_or_frequency(at / "span_hz", rx.span_hz);
    if (doc_.has(at / "reference_level_dbm"))
      rx.reference_level_dbm = doc_.number_in(at / "reference_level_dbm", 0, -150, 30, "dBm");
    if (doc_.has(at / "attenuation_db")) {
      const json& v = doc_.at(at / "attenuation_db");
      if (v.is_string() && v.get<std::string>() == "auto") {
        rx.attenuation_db = -1;
      } else if (v.is_number()) {
        rx.attenuation_db = doc_.number_in(at / "attenuation_db", 0, 0, 100, "dB");
      } else {
        doc_.fail(at / "attenuation_db", "expected a number in dB (0 to 100) or \"auto\"");
      }
    }
    if (doc_.has(at / "averages")) {
      const auto n = doc_.require_integer(at / "averages");
      if (n < 1 || n > 10000) doc_.fail(at / "averages", fmt::format("{} averages: must be 1 to 10000", n));
      rx.averages = static_cast<int>(n);
    }
  }

  // "fast_capture": {max_capture_s, min_load_margin_db}: limits for the plan the station chooses
  // (fast_capture_plan.hpp). The block may be present in a step recipe (kept for switching
  // modes). Hand-set timing keys of earlier versions are refused with a pointer to the limits.
  void load_fast_capture(Recipe& r) {
    const JsonPointer at("/fast_capture");
    const bool given = doc_.has(at);
    if (given) {
      doc_.require_object(at);
      for (const char* old : {"rbw_hz", "source_sweep_time_s", "receiver_sweep_time_s", "receiver_sweeps"}) {
        if (doc_.has(at / old)) {
          doc_.fail(at / old, "the station now plans the RBW and the sweep times itself (echoline dry-run shows the plan); "
                              "give limits instead: max_capture_s and min_load_margin_db");
        }
      }
      doc_.check_keys(at, {"max_capture_s", "min_load_margin_db"});
    }
    if (!given && r.mode != SweepMode::fast_capture) return;
    FastCaptureLimits& fc = r.fast_capture;
    fc.max_capture_s = doc_.number_in(at / "max_capture_s", fc.max_capture_s, 1e-3, 3600, "s");
    fc.min_load_margin_db = doc_.number_in(at / "min_load_margin_db", fc.min_load_margin_db, 0, 100, "dB");
    const std::vector<double> plan = plan_frequencies(r);
    if (plan.size() < 2) doc_.fail(ptr("/segments"), "fast capture needs at least 2 plan frequencies");
  }

  double zero_or_frequency(const JsonPointer& at, double fallback) const {
    if (!doc_.has(at)) return fallback;
    const json& v = doc_.at(at);
    if (v.is_number() && v.get<double>() == 0) return 0;
    return frequency(at);
  }

  void load_calibration(Recipe& r) {
    const JsonPointer at("/calibration");
    doc_.check_keys(at, {"use_short", "max_age_s", "max_units", "max_temperature_change_c", "check_every_units",
                         "check_standard", "check_drift_limit_db", "use_mismatch"});
    CalibrationPolicy& c = r.calibration;
    c.use_short = doc_.bool_or(at / "use_short", c.use_short);
    c.use_mismatch = doc_.bool_or(at / "use_mismatch", c.use_mismatch);
    c.max_age_s = positive(at / "max_age_s", c.max_age_s, "s", 7 * 24 * 3600.0);
    if (doc_.has(at / "max_units")) {
      const auto n = doc_.require_integer(at / "max_units");
      if (n < 1) doc_.fail(at / "max_units", fmt::format("{}: must be 1 or more", n));
      c.max_units = static_cast<int>(std::min<std::int64_t>(n, 1000000000));
    }
    c.max_temperature_change_c = positive(at / "max_temperature_change_c", c.max_temperature_change_c, "°C", 100);
    if (doc_.has(at / "check_every_units")) {
      const auto n = doc_.require_integer(at / "check_every_units");
      if (n < 0) doc_.fail(at / "check_every_units", fmt::format("{}: must be 0 (never) or more", n));
      c.check_every_units = static_cast<int>(std::min<std::int64_t>(n, 1000000000));
    }
    c.check_standard = doc_.enum_or(at / "check_standard", c.check_standard, {"OPEN", "SHORT", "LOAD"});
    if (c.check_standard == "SHORT" && !c.use_short) {
      doc_.fail(at / "check_standard", "SHORT is the check standard but use_short is false");
    }
    c.check_drift_limit_db = positive(at / "check_drift_limit_db", c.check_drift_limit_db, "dB", 20);
  }

  void load_limits(Recipe& r) {
    const JsonPointer at("/limits");
    doc_.require_object(at);
    doc_.check_keys(at, {"mask", "resonance_min_hz", "resonance_max_hz", "min_bandwidth_hz", "bandwidth_threshold_db"});
    const std::vector<double> plan = plan_frequencies(r);
    const double sweep_lo = plan.front();
    const double sweep_hi = plan.back();
    const std::string sweep = format_frequency_range(sweep_lo, sweep_hi);
    Limits& l = r.limits;

    const JsonPointer mask = at / "mask";
    const json& arr = doc_.require_array(mask);
    if (arr.empty()) doc_.fail(mask, "needs at least one segment {start_hz, stop_hz, min_return_loss_db}");
    for (std::size_t i = 0; i < arr.size(); ++i) {
      const JsonPointer m = mask / i;
      doc_.require_object(m);
      doc_.check_keys(m, {"start_hz", "stop_hz", "min_return_loss_db"});
      LimitSegment s;
      s.start_hz = frequency(m / "start_hz");
      s.stop_hz = frequency(m / "stop_hz");
      if (s.stop_hz <= s.start_hz) {
        doc_.fail(m / "stop_hz", fmt::format("stop {} must be above start {}", format_frequency(s.stop_hz),
                                             format_frequency(s.start_hz)));
      }
      s.min_return_loss_db = doc_.require_number(m / "min_return_loss_db", "dB");
      if (!(s.min_return_loss_db > 0) || s.min_return_loss_db > 60) {
        doc_.fail(m / "min_return_loss_db",
                  fmt::format("{} dB is out of range; a return-loss limit is above 0 and at most 60 dB",
                              s.min_return_loss_db));
      }
      if (!l.mask.empty() && s.start_hz < l.mask.back().stop_hz) {
        doc_.fail(m / "start_hz", fmt::format("mask segment {} overlaps or comes before the previous one {}; list "
                                              "segments in increasing frequency without overlap",
                                              format_frequency_range(s.start_hz, s.stop_hz),
                                              format_frequency_range(l.mask.back().start_hz, l.mask.back().stop_hz)));
      }
      if (s.start_hz < sweep_lo - 1e-3 || s.stop_hz > sweep_hi + 1e-3) {
        doc_.fail(m, fmt::format("mask segment {} reaches outside the sweep {}: those frequencies are never measured",
                                 format_frequency_range(s.start_hz, s.stop_hz), sweep));
      }
      const bool covered = std::any_of(plan.begin(), plan.end(), [&](double f) {
        return f >= s.start_hz - 1e-3 && f <= s.stop_hz + 1e-3;
      });
      if (!covered) {
        doc_.fail(m, fmt::format("no sweep point falls inside mask segment {}: add points there",
                                 format_frequency_range(s.start_hz, s.stop_hz)));
      }
      l.mask.push_back(s);
    }

    l.resonance_min_hz = optional_frequency(at / "resonance_min_hz");
    l.resonance_max_hz = optional_frequency(at / "resonance_max_hz");
    if (l.resonance_min_hz.has_value() != l.resonance_max_hz.has_value()) {
      doc_.fail(l.resonance_min_hz ? at / "resonance_min_hz" : at / "resonance_max_hz",
                "give both resonance_min_hz and resonance_max_hz, or neither");
    }
    if (l.resonance_min_hz) {
      if (*l.resonance_max_hz <= *l.resonance_min_hz) {
        doc_.fail(at / "resonance_max_hz", fmt::format("{} must be above resonance_min_hz {}",
                                                       format_frequency(*l.resonance_max_hz),
                                                       format_frequency(*l.resonance_min_hz)));
      }
      // The window must lie strictly inside the sweep so that a resonance outside it can be seen.
      if (*l.resonance_min_hz <= sweep_lo || *l.resonance_max_hz >= sweep_hi) {
        doc_.fail(*l.resonance_min_hz <= sweep_lo ? at / "resonance_min_hz" : at / "resonance_max_hz",
                  fmt::format("resonance window {} must lie inside the sweep {} (with room on both sides to see a "
                              "resonance outside the window)",
                              format_frequency_range(*l.resonance_min_hz, *l.resonance_max_hz), sweep));
      }
    }
    l.bandwidth_threshold_db = positive(at / "bandwidth_threshold_db", l.bandwidth_threshold_db, "dB", 60);
    l.min_bandwidth_hz = optional_frequency(at / "min_bandwidth_hz");
    if (l.min_bandwidth_hz && *l.min_bandwidth_hz > sweep_hi - sweep_lo) {
      doc_.fail(at / "min_bandwidth_hz", fmt::format("{} is wider than the sweep {}: it can never be shown",
                                                     format_frequency(*l.min_bandwidth_hz), sweep));
    }
  }

  void load_trim(Recipe& r) {
    const JsonPointer at("/trim");
    if (!doc_.has(at)) return;
    doc_.require_object(at);
    doc_.check_keys(at, {"element_length_mm", "target_hz"});
    Trim t;
    t.element_length_mm = doc_.require_number(at / "element_length_mm", "mm");
    if (!(t.element_length_mm > 0) || t.element_length_mm > 10000) {
      doc_.fail(at / "element_length_mm", fmt::format("{} mm is out of range; above 0 and at most 10000 mm",
                                                      t.element_length_mm));
    }
    t.target_hz = frequency(at / "target_hz");
    // Advice moves a unit's resonance toward the target: a target the sweep never reaches is a
    // slip (most often the unit, "915 kHz"), and the advice would be absurd.
    const std::vector<double> plan = plan_frequencies(r);
    if (t.target_hz < plan.front() - 1e-3 || t.target_hz > plan.back() + 1e-3) {
      doc_.fail(at / "target_hz", fmt::format("trim target {} is outside the sweep {}: no resonance there is ever "
                                              "measured, and advice toward it would be meaningless; check the unit",
                                              format_frequency(t.target_hz),
                                              format_frequency_range(plan.front(), plan.back())));
    }
    r.trim = t;
  }

  void load_nominal(Recipe& r) {
    const JsonPointer at("/nominal_unit");
    if (!doc_.has(at)) return;
    doc_.require_object(at);
    doc_.check_keys(at, {"q", "bandwidth_hz", "depth_db", "resonance_sd_hz", "center_hz", "model"});
    const std::string model = doc_.string_or(at / "model", "series-rlc");
    if (model == "line-monopole") r.nominal.line_monopole = true;
    else if (model != "series-rlc") doc_.fail(at / "model", fmt::format("\"{}\" is not a unit model; \"series-rlc\" or \"line-monopole\"", model));
    if (doc_.has(at / "q") && doc_.has(at / "bandwidth_hz")) doc_.fail(at, "give either q or bandwidth_hz, not both");
    if (doc_.has(at / "q")) r.nominal.q = doc_.number_in(at / "q", 1, 0.5, 10000, "");
    r.nominal.bandwidth_hz = optional_frequency(at / "bandwidth_hz");
    if (doc_.has(at / "depth_db")) r.nominal.depth_db = doc_.number_in(at / "depth_db", 20, 1, 80, "dB");
    const std::vector<double> plan = plan_frequencies(r);
    const std::string sweep = format_frequency_range(plan.front(), plan.back());
    r.nominal.resonance_sd_hz = optional_frequency(at / "resonance_sd_hz");
    // A spread (one standard deviation) wider than the whole sweep is a lot whose resonances
    // mostly lie outside it: never a lot this recipe measures, nearly always a unit slip.
    if (r.nominal.resonance_sd_hz && *r.nominal.resonance_sd_hz > plan.back() - plan.front() + 1e-3) {
      doc_.fail(at / "resonance_sd_hz",
                fmt::format("production spread {} is wider than the sweep {} ({} across): most resonances would fall "
                            "outside it; check the unit",
                            format_frequency(*r.nominal.resonance_sd_hz), sweep,
                            format_frequency(plan.back() - plan.front())));
    }
    r.nominal.center_hz = optional_frequency(at / "center_hz");
    if (r.nominal.center_hz &&
        (*r.nominal.center_hz < plan.front() - 1e-3 || *r.nominal.center_hz > plan.back() + 1e-3)) {
      doc_.fail(at / "center_hz", fmt::format("nominal resonance centre {} is outside the sweep {}; check the unit",
                                              format_frequency(*r.nominal.center_hz), sweep));
    }
  }

  void load_scpi(const JsonPointer& at, std::map<std::string, std::vector<std::string>>& out) {
    if (!doc_.has(at)) return;
    doc_.require_object(at);
    doc_.check_keys(at, {"source", "receiver", "switch"});
    for (const char* role : {"source", "receiver", "switch"}) {
      auto lines = doc_.string_list_or_empty(at / role);
      for (std::size_t i = 0; i < lines.size(); ++i) {
        if (lines[i].empty() || lines[i].find_first_of("\r\n") != std::string::npos) {
          doc_.fail(at / role / i, "an SCPI line must be non-empty and hold no line break");
        }
      }
      if (!lines.empty()) out[role] = std::move(lines);
    }
  }

  const JsoncDocument& doc_;
};

}  // namespace

Recipe parse_recipe(std::string text, std::string file_name) {
  const std::string hash = sha256_hex(text);
  std::string copy = text;
  const JsoncDocument doc = JsoncDocument::parse(std::move(text), file_name);
  Recipe r = Loader(doc).load();
  r.source_text = std::move(copy);
  r.content_hash = hash;
  r.source_path = file_name;
  return r;
}

Recipe load_recipe(const std::filesystem::path& file) {
  std::ifstream in(file, std::ios::binary);
  if (!in) throw drivers::ConfigError(file.string(), 0, "", "cannot open the recipe file for reading");
  std::string bytes((std::istreambuf_iterator<char>(in)), std::istreambuf_iterator<char>());
  if (in.bad()) throw drivers::ConfigError(file.string(), 0, "", "read error");
  return parse_recipe(std::move(bytes), file.string());
}

}  // namespace echoline::core
