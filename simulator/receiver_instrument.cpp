// Simulated spectrum analyzer: see receiver_instrument.hpp and instrument.hpp.
//
// Reading model per trace bin (common practice, no source):
//   noise: complex Gaussian with mean power kTB + NF + attenuation (noise_floor_dbm), so the
//          sample detector reads a Rayleigh envelope; the positive-peak detector takes the
//          largest of ~bin-width/RBW samples;
//   tone:  the source CW through the bench and DUT (coupled_power_dbm; the DUT behind the
//          offset line when World::via_offset_line), visible once the source has settled,
//          shaped by the Gaussian RBW filter at the bin's offset (for the positive detector:
//          the closest point of the bin), added as a coherent amplitude;
//   reading noise: a multiplicative Gaussian of reading_noise_db.
//
// Swept source (World::source_sweeping, fast capture). The analyzer is tuned to
// f_rx(t) = start + span * (t - t0) / sweep_time; with the positive-peak detector bin i holds
// the largest response while f_rx is within half a bin of the bin frequency (its dwell,
// sweep_time / (points - 1) long; the sample detector looks only at the bin's instant). The
// tone is seen at the closest approach |f_src(t) - f_rx(t)| during the dwell, through the RBW
// shape, so a bin gets the tone's full peak when the source passes the analyzer's frequency
// during the dwell. The unit is then seen at the frequency where the two meet, up to half a bin
// from the bin frequency, set by the free-running ramp's phase (the same for every bin of one
// capture). Timing condition (what a fast-capture setup must meet): relative to the
// analyzer, which moves one bin b during a dwell, the ramp must cover its whole band B in one
// dwell: dwell >= source sweep x (B + b) / B (derived in daemon/core/MEASUREMENT.md §11; a dwell
// of exactly one source sweep leaves one bin whose tone passes just outside it). Then one
// receiver sweep with max hold fills the trace. A shorter receiver sweep leaves bins that
// missed the tone low or at the noise floor; max hold over more receiver sweeps fills them only
// as the two sweeps' phases happen to line up.
// External trigger (TRIGger:SOURce EXTernal): INIT arms the sweep, which starts TRIGger:DELay
// after the next pulse at the trigger input. The only pulse source is the swept source's
// ramp-start output, through the bench's trigger cable (World::trigger_cable): a pulse reaches
// the input the cable's latency (± its jitter) after each ramp starts. With no cable, or no
// ramp, the armed sweep waits for ever, as a real analyzer does (*OPC? does not answer). A
// triggered sweep starts at a known phase of the ramp, so the tone meets every bin at a
// frequency the planner chose instead of one set by chance.
// A tone crossing the RBW at rate R (Hz/s) loses peak power: a linear FM through a Gaussian
// filter of 3 dB bandwidth B peaks (1 + x^2)^(-1/2) in power with x = 2 ln2 R / (pi B^2)
// (derived here from the Gaussian's impulse response; the same form as the sweep-rate loss
// commonly quoted for swept analyzers, common practice), and a burst of B/R seconds is
// smoothed by the video filter (single pole at VBW): factor 1 - exp(-2 pi VBW B / R). Both
// are applied with a swept source and with a manual (SWEep:TIME) analyzer sweep time; at the
// automatic sweep time the analyzer is taken as amplitude-calibrated (common practice, no
// source).
#include "simulator/receiver_instrument.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstring>
#include <limits>
#include <numbers>
#include <optional>
#include <random>
#include <stdexcept>

#include <nlohmann/json.hpp>
#include <spdlog/spdlog.h>

#include "simulator/command_tree.hpp"
#include "simulator/instrument.hpp"
#include "simulator/physics/dut_models.hpp"
#include "simulator/physics/offset_line.hpp"
#include "simulator/physics/spectrum.hpp"

namespace echoline::sim {

ReceiverConfig receiver_config_from_json(const nlohmann::json& config) {
  ReceiverConfig c;
  c.identity = detail::config_identity(config, c.identity);
  c.frequency_range_hz = detail::config_range(config, "frequency_range_hz", c.frequency_range_hz);
  c.noise_figure_db = detail::config_number(config, "noise_figure_db", c.noise_figure_db);
  c.max_safe_input_dbm = detail::config_number(config, "max_safe_input_dbm", c.max_safe_input_dbm);
  c.compression_dbm = detail::config_number(config, "compression_dbm", c.max_safe_input_dbm);
  c.reading_noise_db = detail::config_number(config, "reading_noise_db", c.reading_noise_db);
  c.seed = detail::config_seed(config, c.seed);
  if (c.frequency_range_hz.first <= 0) throw std::invalid_argument("instrument settings: \"frequency_range_hz\": must be above 0 Hz");
  if (c.reading_noise_db < 0) throw std::invalid_argument("instrument settings: \"reading_noise_db\": must be >= 0 dB");
  return c;
}

namespace {

constexpr double kMinRbwHz = 1, kMaxRbwHz = 10e6;
constexpr double kMinPoints = 2, kMaxPoints = 10001;
constexpr std::size_t kMarkers = 4;
constexpr double kNeverS = 1e9;   // an armed sweep with no trigger: "never" on the sim clock

// What the test port sees, for one use: the connected DUT (an unterminated port reflects like
// `open`), behind the offset line when World::via_offset_line.
class PortLoad {
 public:
  PortLoad(const World& world, const Dut& open)
      : plain_(world.connected ? *world.connected : open), through_(plain_, world.standards.offset_line),
        via_line_(world.via_offset_line) {}
  const Dut& dut() const { return via_line_ ? static_cast<const Dut&>(through_) : plain_; }

 private:
  const Dut& plain_;
  OffsetLineView through_;
  bool via_line_;
};

double mw_of(double dbm) { return std::pow(10.0, dbm / 10.0); }
double dbm_of(double mw) { return 10.0 * std::log10(std::max(mw, 1e-30)); }

class ReceiverInstrument final : public SimInstrument {
 public:
  ReceiverInstrument(World& world, ReceiverConfig config)
      : world_(world), config_(std::move(config)), rng_(config_.seed), open_(make_open()) {
    reset();
    add_common_commands(tree_, status_, CommonHooks{[this] { return config_.identity; }, [this] { reset(); }});
    add_frequency_commands();
    add_sweep_commands();
    add_trace_commands();
  }

  std::vector<Reply> handle(std::string_view message) override { return tree_.execute(message, status_, world_.now_s); }
  std::string role() const override { return "receiver"; }
  std::string identity() const override { return config_.identity; }
  void query_interrupted() override { status_.push_error(-410); }
  void query_unterminated() override { status_.push_error(-420); }
  void push_error(int code, std::string message) override { status_.push_error_message(code, std::move(message)); }

 private:
  enum Detector : std::size_t { positive = 0, sample = 1 };
  enum TraceMode : std::size_t { write = 0, maxhold = 1 };
  struct Marker { bool on = false; std::size_t index = 0; };

  double fmin() const { return config_.frequency_range_hz.first; }
  double fmax() const { return config_.frequency_range_hz.second; }
  double start() const { return center_ - span_ / 2; }
  double stop() const { return center_ + span_ / 2; }
  double bin_hz(std::size_t i) const {
    return points_ < 2 ? center_ : start() + span_ * static_cast<double>(i) / static_cast<double>(points_ - 1);
  }
  double sweep_time() const { return manual_sweep_time_s_ > 0 ? manual_sweep_time_s_ : sweep_time_s(span_, rbw_, vbw_); }

  // Peak-power loss (dB, >= 0) of a tone crossing the RBW at `rate_hz_s` (see the file comment).
  double crossing_loss_db(double rate_hz_s) const {
    if (!(rate_hz_s > 0)) return 0.0;
    const double x = 2.0 * std::log(2.0) * rate_hz_s / (std::numbers::pi * rbw_ * rbw_);
    const double video = 1.0 - std::exp(-2.0 * std::numbers::pi * vbw_ * rbw_ / rate_hz_s);
    return 5.0 * std::log10(1.0 + x * x) - 10.0 * std::log10(std::max(video, 1e-30));
  }

  // Closest approach of the swept source to the analyzer's tuned frequency during [ta, tb]
  // (the bin's dwell). f_rx(t) = rx_start + rx_rate * (t - t0).
  struct Approach { bool seen = false; double offset_hz = 0; double source_hz = 0; };
  Approach swept_approach(double ta, double tb, double t0, double rx_rate) const {
    Approach best;
    const double epoch = world_.source_sweep_epoch_s;
    ta = std::max(ta, epoch);   // nothing before the source has settled
    if (tb < ta) return best;
    const double s0 = world_.source_sweep_start_hz, s1 = world_.source_sweep_stop_hz;
    const double period = world_.source_sweep_time_s;
    auto f_rx = [&](double t) { return start() + rx_rate * (t - t0); };
    const double pa = (ta - epoch) / period, pb = (tb - epoch) / period;
    const double ka = std::floor(pa), kb = std::floor(pb);
    if (kb - ka > 64) {
      // Many whole source sweeps in the window: the source passes every frequency in [s0, s1].
      const double lo = std::min(f_rx(ta), f_rx(tb)), hi = std::max(f_rx(ta), f_rx(tb));
      best.seen = true;
      best.offset_hz = hi < s0 ? s0 - hi : (lo > s1 ? lo - s1 : 0.0);
      best.source_hz = std::clamp((lo + hi) / 2, s0, s1);
      return best;
    }
    for (double k = ka; k <= kb; k += 1) {
      const double a = std::max(ta, epoch + k * period), b = std::min(tb, epoch + (k + 1) * period);
      if (b < a) continue;
      auto f_s = [&](double t) { return s0 + (s1 - s0) * ((t - epoch) / period - k); };
      const double da = f_s(a) - f_rx(a), db = f_s(b) - f_rx(b);
      Approach here{true, 0, 0};
      if (da * db <= 0 && da != db) {
        const double tc = a + (b - a) * da / (da - db);
        here.source_hz = f_s(tc);
      } else if (std::abs(da) <= std::abs(db)) {
        here.offset_hz = std::abs(da);
        here.source_hz = f_s(a);
      } else {
        here.offset_hz = std::abs(db);
        here.source_hz = f_s(b);
      }
      if (!best.seen || here.offset_hz < best.offset_hz) best = here;
    }
    return best;
  }

  void reset() {
    center_ = std::clamp(1e9, fmin(), fmax());
    manual_sweep_time_s_ = 0;
    span_ = 0;
    set_span(100e6);
    rbw_ = 1e6;
    vbw_ = 1e6;
    ref_level_dbm_ = 0;
    attenuation_db_ = 0;
    points_ = 401;
    continuous_ = false;
    trigger_external_ = false;
    trigger_delay_s_ = 0;
    average_on_ = false;
    average_count_ = 10;
    detector_ = positive;
    trace_mode_ = write;
    binary_bits_ = 0;
    swapped_ = false;
    trace_.clear();
    markers_ = {};
  }

  // Span change keeps the center, moving it inward when the span would leave the range.
  void set_span(double span) {
    span_ = std::min(span, fmax() - fmin());
    center_ = std::clamp(center_, fmin() + span_ / 2, fmax() - span_ / 2);
    axis_changed();
  }
  // Center change keeps the span, shrinking it when it would leave the range.
  void set_center(double center) {
    center_ = center;
    span_ = std::min(span_, 2 * std::min(center_ - fmin(), fmax() - center_));
    axis_changed();
  }
  void set_start_stop(double a, double b) {
    center_ = (a + b) / 2;
    span_ = b - a;
    axis_changed();
  }
  void axis_changed() {
    if (trace_mode_ == maxhold) trace_.clear();  // the held trace belonged to another axis
  }

  // One sweep starting at sim time t0; returns readings in dBm. `overload` is set when the
  // input exceeded the max safe level during this sweep.
  std::vector<double> sweep_once(double t0, bool& overload) {
    const PortLoad port(world_, *open_);
    const Dut& dut = port.dut();
    const double st = sweep_time();
    const bool on = world_.source_output_on;
    const double f_src = world_.source_frequency_hz;
    const double input_dbm = on ? coupled_power_dbm(world_.bench, dut, f_src, world_.source_power_dbm) : -400.0;
    if (on && input_dbm > config_.max_safe_input_dbm && world_.source_settled_at_s <= t0 + st) overload = true;
    const double noise_mw = mw_of(noise_floor_dbm(rbw_, config_.noise_figure_db) + attenuation_db_);
    const double bin_width = points_ > 1 ? span_ / static_cast<double>(points_ - 1) : 0.0;
    std::size_t k_samples = 1;
    if (detector_ == positive) k_samples = static_cast<std::size_t>(std::clamp(std::round(bin_width / rbw_), 1.0, 64.0));
    std::normal_distribution<double> gauss(0.0, 1.0);
    std::vector<double> out(points_);
    std::vector<double> tone_hz;   // where each bin saw the swept tone (World::last_sweep_tone_hz)
    if (on && world_.source_sweeping) tone_hz.assign(points_, std::numeric_limits<double>::quiet_NaN());
    for (std::size_t i = 0; i < points_; ++i) {
      const double t = t0 + (points_ > 1 ? st * static_cast<double>(i) / static_cast<double>(points_ - 1) : 0.0);
      const double f = bin_hz(i);
      double tone_amp = 0;  // sqrt(mW)
      if (on && world_.source_sweeping) {
        const double rx_rate = st > 0 ? span_ / st : 0.0;
        const double dwell = points_ > 1 ? st / static_cast<double>(points_ - 1) : st;
        const double ta = detector_ == positive ? std::max(t0, t - dwell / 2) : t;
        const double tb = detector_ == positive ? std::min(t0 + st, t + dwell / 2) : t;
        const Approach a = swept_approach(ta, tb, t0, rx_rate);
        if (a.seen) {
          tone_hz[i] = a.source_hz;
          const double src_rate = (world_.source_sweep_stop_hz - world_.source_sweep_start_hz) / world_.source_sweep_time_s;
          const double level = coupled_power_dbm(world_.bench, dut, a.source_hz, world_.source_power_dbm);
          tone_amp = std::sqrt(mw_of(level + rbw_response_db(a.offset_hz, rbw_) - crossing_loss_db(std::abs(src_rate - rx_rate))));
        }
      } else if (on && t >= world_.source_settled_at_s) {
        double offset = std::abs(f - f_src);
        if (detector_ == positive) offset = std::max(0.0, offset - bin_width / 2);
        const double loss = manual_sweep_time_s_ > 0 && st > 0 ? crossing_loss_db(span_ / st) : 0.0;
        tone_amp = std::sqrt(mw_of(input_dbm + rbw_response_db(offset, rbw_) - loss));
      }
      double best = 0;
      for (std::size_t k = 0; k < k_samples; ++k) {
        const double sigma = std::sqrt(noise_mw / 2);
        const double re = tone_amp + sigma * gauss(rng_);
        const double im = sigma * gauss(rng_);
        best = std::max(best, re * re + im * im);
      }
      double dbm = dbm_of(best) + config_.reading_noise_db * gauss(rng_);
      out[i] = std::min(dbm, config_.compression_dbm);  // the input stage limits the reading
    }
    world_.last_sweep_tone_hz = std::move(tone_hz);
    return out;
  }

  // When an INIT at `now` starts its sweep: now, or after the trigger (see the file comment);
  // nullopt when no trigger will come.
  std::optional<double> sweep_start_s(double now) {
    if (!trigger_external_) return now;
    if (!world_.trigger_cable || !world_.source_sweeping) return std::nullopt;
    std::uniform_real_distribution<double> jitter(-world_.trigger_jitter_s, world_.trigger_jitter_s);
    const double pulse = world_.next_ramp_start_at(now) + world_.trigger_latency_s + jitter(rng_);
    return pulse + trigger_delay_s_;
  }

  // INIT: runs the (averaged) sweep from its start; the result is readable after the modelled time.
  void initiate(double now) {
    const std::optional<double> begin = sweep_start_s(now);
    if (!begin) {
      sweep_end_s_ = now + kNeverS;   // armed, waiting for a trigger that does not come
      status_.begin_operation(sweep_end_s_);
      return;
    }
    now = *begin;
    ++world_.sweep_counter;
    if (world_.connected) world_.connected->on_sweep(world_.sweep_counter);
    const std::size_t count = average_on_ ? average_count_ : 1;
    const double st = sweep_time();
    bool overload = false;
    std::vector<double> sum_mw(points_, 0.0);
    for (std::size_t n = 0; n < count; ++n) {
      const std::vector<double> one = sweep_once(now + st * static_cast<double>(n), overload);
      for (std::size_t i = 0; i < points_; ++i) sum_mw[i] += mw_of(one[i]);  // linear power average
    }
    std::vector<double> result(points_);
    for (std::size_t i = 0; i < points_; ++i) result[i] = dbm_of(sum_mw[i] / static_cast<double>(count));
    if (trace_mode_ == maxhold && trace_.size() == result.size()) {
      for (std::size_t i = 0; i < points_; ++i) trace_[i] = std::max(trace_[i], result[i]);
    } else {
      trace_ = std::move(result);
    }
    sweep_end_s_ = now + st * static_cast<double>(count);
    status_.begin_operation(sweep_end_s_);
    if (overload) report_overload();
  }

  void report_overload() {
    const PortLoad port(world_, *open_);
    const Dut& dut = port.dut();
    const double in = coupled_power_dbm(world_.bench, dut, world_.source_frequency_hz, world_.source_power_dbm);
    // A real analyzer can be damaged above its max safe input; the sim only complains.
    const std::string msg = fmt::format("Device-specific error;input overload: {:.1f} dBm at the input, max safe input {:.1f} dBm",
                                        in, config_.max_safe_input_dbm);
    status_.push_error_message(-300, msg);
    spdlog::warn("{}: {}", config_.identity, msg);
  }

  // In continuous mode a read sees the sweep that has just finished.
  void refresh_if_continuous(double now) {
    if (continuous_ && now >= sweep_end_s_) {
      const double st = sweep_time() * (average_on_ ? static_cast<double>(average_count_) : 1.0);
      initiate(now - st);
      status_.abort_operations(now);  // continuous sweeping is not a pending operation
    }
  }

  std::optional<ScpiError> need_trace(const Call& c) {
    refresh_if_continuous(c.now_s);
    if (trace_.size() != points_) return ScpiError{-230, c.unit.header_text + ": no sweep with the current settings; send INIT first"};
    return std::nullopt;
  }

  void add_frequency_commands() {
    const NumericLimits frange{fmin(), fmax(), std::clamp(1e9, fmin(), fmax())};
    // SCPI-99 Vol 2 SENSe:FREQuency subsystem (from memory)
    tree_.add("[SENSe:]FREQuency:CENTer[?]", [this, frange](const Call& c) {
      return numeric_setting(c, Unit::hertz, frange, center_, [this](double v) { set_center(v); return std::optional<ScpiError>{}; });
    });
    tree_.add("[SENSe:]FREQuency:SPAN[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::hertz, {0, fmax() - fmin(), 100e6}, span_, [this](double v) { set_span(v); return std::optional<ScpiError>{}; });
    });
    tree_.add("[SENSe:]FREQuency:STARt[?]", [this, frange](const Call& c) {
      return numeric_setting(c, Unit::hertz, frange, start(), [this](double v) {
        set_start_stop(v, std::max(v, stop()));
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("[SENSe:]FREQuency:STOP[?]", [this, frange](const Call& c) {
      return numeric_setting(c, Unit::hertz, frange, stop(), [this](double v) {
        set_start_stop(std::min(v, start()), v);
        return std::optional<ScpiError>{};
      });
    });
    // SENSe:BANDwidth (continuous values; real analyzers round to a 1-3-10 series)
    tree_.add("[SENSe:]BANDwidth|BWIDth[:RESolution][?]", [this](const Call& c) {
      return numeric_setting(c, Unit::hertz, {kMinRbwHz, kMaxRbwHz, 1e6}, rbw_, [this](double v) { rbw_ = v; return std::optional<ScpiError>{}; });
    });
    tree_.add("[SENSe:]BANDwidth|BWIDth:VIDeo[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::hertz, {kMinRbwHz, kMaxRbwHz, 1e6}, vbw_, [this](double v) { vbw_ = v; return std::optional<ScpiError>{}; });
    });
    // Reference level: stored and reported; it does not clip readings in this model.
    tree_.add("DISPlay[:WINDow{1:1}]:TRACe{1:1}:Y[:SCALe]:RLEVel[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::dbm, {-150, 30, 0}, ref_level_dbm_, [this](double v) { ref_level_dbm_ = v; return std::optional<ScpiError>{}; });
    });
    // Input attenuation raises the displayed noise floor dB for dB: it sits ahead of the first
    // mixer, whose noise sets the floor (common practice).
    tree_.add("INPut:ATTenuation[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::db, {0, 70, 0}, attenuation_db_, [this](double v) { attenuation_db_ = v; return std::optional<ScpiError>{}; });
    });
  }

  void add_sweep_commands() {
    // SCPI-99 Vol 2 SENSe:SWEep:TIME[:AUTO]: a value sets a manual sweep time (AUTO OFF);
    // AUTO ON returns to k*span/RBW^2. A manual time shorter than auto loses amplitude
    // (crossing_loss_db), as a real analyzer does when swept too fast.
    tree_.add("[SENSe:]SWEep:TIME[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::seconds, {kMinSweepTimeS, 3600, 0.1}, sweep_time(), [this](double v) {
        manual_sweep_time_s_ = v;
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("[SENSe:]SWEep:TIME:AUTO[?]", [this](const Call& c) {
      return bool_setting(c, manual_sweep_time_s_ <= 0, [this](bool on) {
        if (on) manual_sweep_time_s_ = 0;
        else if (manual_sweep_time_s_ <= 0) manual_sweep_time_s_ = sweep_time();  // hold the current value
      });
    });
    tree_.add("[SENSe:]SWEep:POINts[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::none, {kMinPoints, kMaxPoints, 401}, static_cast<double>(points_), [this](double v) {
        points_ = static_cast<std::size_t>(std::lround(v));
        trace_.clear();
        return std::optional<ScpiError>{};
      });
    });
    // Trigger model (SCPI-99 Vol 1 ch. 2 / Vol 2 INITiate)
    tree_.add("INITiate[:IMMediate]", [this](const Call& c) {
      if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
      if (continuous_) return Outcome::fail(-213, "INITiate: continuous sweep is on");
      initiate(c.now_s);
      return Outcome::done();
    });
    // SCPI-99 Vol 2 TRIGger[:SEQuence]:SOURce IMMediate|EXTernal and :DELay (from memory).
    tree_.add("TRIGger[:SEQuence]:SOURce[?]", [this](const Call& c) {
      return choice_setting(c, {"IMMediate", "EXTernal"}, trigger_external_ ? 1 : 0, [this](std::size_t i) {
        trigger_external_ = i == 1;
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("TRIGger[:SEQuence]:DELay[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::seconds, {0, 10, 0}, trigger_delay_s_, [this](double v) {
        trigger_delay_s_ = v;
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("INITiate:CONTinuous[?]", [this](const Call& c) {
      return bool_setting(c, continuous_, [this, &c](bool on) {
        continuous_ = on;
        if (on) status_.abort_operations(c.now_s);
      });
    });
    tree_.add("ABORt", [this](const Call& c) {
      if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
      sweep_end_s_ = std::min(sweep_end_s_, c.now_s);
      status_.abort_operations(c.now_s);
      return Outcome::done();
    });
    tree_.add("[SENSe:]AVERage:COUNt[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::none, {1, 10000, 10}, static_cast<double>(average_count_), [this](double v) {
        average_count_ = static_cast<std::size_t>(std::lround(v));
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("[SENSe:]AVERage[:STATe][?]", [this](const Call& c) {
      return bool_setting(c, average_on_, [this](bool on) { average_on_ = on; });
    });
    tree_.add("[SENSe:]DETector[:FUNCtion][?]", [this](const Call& c) {
      return choice_setting(c, {"POSitive", "SAMPle"}, detector_, [this](std::size_t i) {
        detector_ = static_cast<Detector>(i);
        return std::optional<ScpiError>{};
      });
    });
  }

  void add_trace_commands() {
    // TRACe:MODE is common practice, not SCPI-99.
    tree_.add("TRACe{1:1}:MODE[?]", [this](const Call& c) {
      return choice_setting(c, {"WRITe", "MAXHold"}, trace_mode_, [this](std::size_t i) {
        if (i == write && trace_mode_ == maxhold) trace_.clear();
        if (i == maxhold && trace_mode_ == write) trace_.clear();  // max hold starts afresh
        trace_mode_ = static_cast<TraceMode>(i);
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("TRACe{1:1}[:DATA]?", [this](const Call& c) {
      if (auto e = check_param_count(c, 1, 1)) return Outcome::fail(*e);
      const Parameter& p = c.params()[0];
      if (p.kind != Parameter::Kind::character) return Outcome::fail(-104, "TRACe:DATA? needs a trace name (TRACE1)");
      if (p.text != "TRACE1" && p.text != "TRAC1") return Outcome::fail(-224, "TRACe:DATA? " + p.text + ": only TRACE1 exists");
      if (auto e = need_trace(c)) return Outcome::fail(*e);
      return Outcome::text(format_trace(), status_.remaining_s(c.now_s));
    });
    // SCPI-99 Vol 2 FORMat[:DATA] ASCii[,<n>] | REAL[,32|64]
    tree_.add("FORMat[:DATA][?]", [this](const Call& c) {
      if (c.query) {
        if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
        return Outcome::text(binary_bits_ == 0 ? "ASC" : "REAL," + std::to_string(binary_bits_));
      }
      if (auto e = check_param_count(c, 1, 2)) return Outcome::fail(*e);
      auto kind = to_choice(c.params()[0], {"ASCii", "REAL"});
      if (auto* e = std::get_if<ScpiError>(&kind)) return Outcome::fail(*e);
      int bits = std::get<std::size_t>(kind) == 0 ? 0 : 32;
      if (bits != 0 && c.params().size() == 2) {
        auto n = to_number(c.params()[1], Unit::none, {32, 64, 32});
        if (auto* e = std::get_if<ScpiError>(&n)) return Outcome::fail(*e);
        const double v = std::get<double>(n);
        if (v != 32 && v != 64) return Outcome::fail(-224, "FORMat REAL," + c.params()[1].text + ": 32 or 64");
        bits = static_cast<int>(v);
      }
      binary_bits_ = bits;  // ASCii,<n>: the digit count is accepted and not used
      return Outcome::done();
    });
    tree_.add("FORMat:BORDer[?]", [this](const Call& c) {
      return choice_setting(c, {"NORMal", "SWAPped"}, swapped_ ? 1 : 0, [this](std::size_t i) {
        swapped_ = i == 1;
        return std::optional<ScpiError>{};
      });
    });
    // Markers: common practice (vendor-defined), not SCPI-99.
    tree_.add("CALCulate:MARKer{1:4}[:STATe][?]", [this](const Call& c) {
      Marker& m = markers_[static_cast<std::size_t>(c.suffix() - 1)];
      return bool_setting(c, m.on, [&m](bool on) { m.on = on; });
    });
    tree_.add("CALCulate:MARKer{1:4}:MAXimum[:PEAK]", [this](const Call& c) {
      if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
      if (auto e = need_trace(c)) return Outcome::fail(*e);
      Marker& m = markers_[static_cast<std::size_t>(c.suffix() - 1)];
      m.on = true;
      m.index = static_cast<std::size_t>(std::max_element(trace_.begin(), trace_.end()) - trace_.begin());
      return Outcome::done();
    });
    tree_.add("CALCulate:MARKer{1:4}:X[?]", [this](const Call& c) {
      Marker& m = markers_[static_cast<std::size_t>(c.suffix() - 1)];
      if (c.query) {
        if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
        if (!m.on) return Outcome::fail(-221, c.unit.header_text + ": marker is off");
        return Outcome::text(format_nr3(bin_hz(std::min(m.index, points_ - 1))), status_.remaining_s(c.now_s));
      }
      return numeric_setting(c, Unit::hertz, {start(), stop(), center_}, bin_hz(m.index), [this, &m](double f) {
        m.on = true;
        m.index = span_ > 0 ? static_cast<std::size_t>(std::lround((f - start()) / span_ * static_cast<double>(points_ - 1))) : 0;
        return std::optional<ScpiError>{};
      });
    });
    tree_.add("CALCulate:MARKer{1:4}:Y?", [this](const Call& c) {
      if (auto e = check_param_count(c, 0, 0)) return Outcome::fail(*e);
      Marker& m = markers_[static_cast<std::size_t>(c.suffix() - 1)];
      if (!m.on) return Outcome::fail(-221, c.unit.header_text + ": marker is off");
      if (auto e = need_trace(c)) return Outcome::fail(*e);
      return Outcome::text(format_nr3(trace_[std::min(m.index, trace_.size() - 1)]), status_.remaining_s(c.now_s));
    });
  }

  std::string format_trace() const {
    std::string out;
    if (binary_bits_ == 0) {  // ASCii: comma-separated NR3
      for (std::size_t i = 0; i < trace_.size(); ++i) {
        if (i) out.push_back(',');
        out += format_nr3(trace_[i]);
      }
      return out;
    }
    // REAL,32/64: IEEE 754 values, NORMal = most significant byte first; definite block.
    std::string payload;
    for (double v : trace_) {
      unsigned char bytes[8];
      std::size_t n = 0;
      if (binary_bits_ == 32) {
        const float f = static_cast<float>(v);
        std::uint32_t u;
        std::memcpy(&u, &f, 4);
        for (int b = 3; b >= 0; --b) bytes[n++] = static_cast<unsigned char>(u >> (8 * b));
      } else {
        std::uint64_t u;
        std::memcpy(&u, &v, 8);
        for (int b = 7; b >= 0; --b) bytes[n++] = static_cast<unsigned char>(u >> (8 * b));
      }
      if (swapped_) std::reverse(bytes, bytes + n);
      payload.append(reinterpret_cast<const char*>(bytes), n);
    }
    const std::string len = std::to_string(payload.size());
    return "#" + std::to_string(len.size()) + len + payload;
  }

  World& world_;
  ReceiverConfig config_;
  StatusModel status_;
  CommandTree tree_;
  std::mt19937_64 rng_;
  std::unique_ptr<Dut> open_;
  double center_ = 1e9, span_ = 100e6, rbw_ = 1e6, vbw_ = 1e6;
  double manual_sweep_time_s_ = 0;   // > 0: SWEep:TIME set by hand (AUTO OFF)
  double ref_level_dbm_ = 0, attenuation_db_ = 0;
  std::size_t points_ = 401;
  bool continuous_ = false, average_on_ = false;
  bool trigger_external_ = false;    // TRIGger:SOURce EXTernal
  double trigger_delay_s_ = 0;       // TRIGger:DELay
  std::size_t average_count_ = 10;
  Detector detector_ = positive;
  TraceMode trace_mode_ = write;
  int binary_bits_ = 0;   // 0 = ASCii
  bool swapped_ = false;
  std::vector<double> trace_;
  double sweep_end_s_ = 0;
  std::array<Marker, kMarkers> markers_{};
};

}  // namespace

std::unique_ptr<SimInstrument> make_receiver_instrument(World& world, const nlohmann::json& config) {
  return std::make_unique<ReceiverInstrument>(world, receiver_config_from_json(config));
}

}  // namespace echoline::sim
