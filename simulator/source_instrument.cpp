// Simulated signal generator: see source_instrument.hpp and instrument.hpp.
#include "simulator/source_instrument.hpp"

#include <algorithm>

#include <nlohmann/json.hpp>

#include "simulator/command_tree.hpp"
#include "simulator/instrument.hpp"

namespace echoline::sim {

SourceConfig source_config_from_json(const nlohmann::json& config) {
  SourceConfig c;
  c.identity = detail::config_identity(config, c.identity);
  c.frequency_range_hz = detail::config_range(config, "frequency_range_hz", c.frequency_range_hz);
  c.power_range_dbm = detail::config_range(config, "power_range_dbm", c.power_range_dbm);
  c.settle_s = detail::config_number(config, "settle_s", c.settle_s);
  c.level_accuracy_db = detail::config_number(config, "level_accuracy_db", c.level_accuracy_db);
  c.seed = detail::config_seed(config, c.seed);
  if (c.frequency_range_hz.first <= 0) throw std::invalid_argument("instrument settings: \"frequency_range_hz\": must be above 0 Hz");
  if (c.settle_s < 0) throw std::invalid_argument("instrument settings: \"settle_s\": must be >= 0 s");
  if (c.level_accuracy_db < 0) throw std::invalid_argument("instrument settings: \"level_accuracy_db\": must be >= 0 dB");
  return c;
}

namespace {

class SourceInstrument final : public SimInstrument {
 public:
  SourceInstrument(World& world, SourceConfig config) : world_(world), config_(std::move(config)) {
    // A fixed per-instrument level offset (calibration error), seeded.
    level_offset_db_ = config_.level_accuracy_db * detail::hashed_normal(config_.seed, -1.0, -1.0);
    reset();
    add_common_commands(tree_, status_, CommonHooks{[this] { return config_.identity; }, [this] { reset(); }});
    add_commands();
  }

  std::vector<Reply> handle(std::string_view message) override { return tree_.execute(message, status_, world_.now_s); }
  std::string role() const override { return "source"; }
  std::string identity() const override { return config_.identity; }
  void query_interrupted() override { status_.push_error(-410); }
  void query_unterminated() override { status_.push_error(-420); }
  void push_error(int code, std::string message) override { status_.push_error_message(code, std::move(message)); }

 private:
  void reset() {
    frequency_hz_ = std::clamp(1e9, config_.frequency_range_hz.first, config_.frequency_range_hz.second);
    power_dbm_ = std::clamp(-20.0, config_.power_range_dbm.first, config_.power_range_dbm.second);
    output_on_ = false;  // *RST turns RF off (safe state)
    sweeping_ = false;   // *RST: CW mode
    sweep_start_hz_ = std::clamp(0.9e9, config_.frequency_range_hz.first, config_.frequency_range_hz.second);
    sweep_stop_hz_ = std::clamp(1.1e9, config_.frequency_range_hz.first, config_.frequency_range_hz.second);
    sweep_time_s_ = 0.01;
    publish();
  }

  // Writes the actual output into the World; the receiver sees it after settling.
  // In sweep mode the tone restarts from the start frequency after settling; the level
  // flatness over the sweep (0.1 x level accuracy in CW) is not modelled there.
  void publish() {
    const double flatness_db =
        sweeping_ ? 0.0 : 0.1 * config_.level_accuracy_db * detail::hashed_normal(config_.seed, frequency_hz_, power_dbm_);
    world_.source_frequency_hz = sweeping_ ? sweep_start_hz_ : frequency_hz_;
    world_.source_power_dbm = power_dbm_ + level_offset_db_ + flatness_db;
    world_.source_output_on = output_on_;
    world_.source_settled_at_s = world_.now_s + config_.settle_s;
    world_.source_sweeping = sweeping_;
    world_.source_sweep_start_hz = sweep_start_hz_;
    world_.source_sweep_stop_hz = sweep_stop_hz_;
    world_.source_sweep_time_s = sweep_time_s_;
    world_.source_sweep_epoch_s = world_.source_settled_at_s;
  }

  void add_commands() {
    const auto [fmin, fmax] = config_.frequency_range_hz;
    const auto [pmin, pmax] = config_.power_range_dbm;
    const NumericLimits flim{fmin, fmax, std::clamp(1e9, fmin, fmax)};
    const NumericLimits plim{pmin, pmax, std::clamp(-20.0, pmin, pmax)};
    // SCPI-99 Vol 2 SOURce:FREQuency subsystem (from memory)
    tree_.add("[SOURce:]FREQuency[:CW|:FIXed][?]", [this, flim](const Call& c) {
      return numeric_setting(c, Unit::hertz, flim, frequency_hz_, [this](double v) -> std::optional<ScpiError> {
        frequency_hz_ = v;
        publish();
        return std::nullopt;
      });
    });
    // SCPI-99 Vol 2 SOURce:FREQuency:MODE CW|FIXed|SWEep (from memory). SWEep: the
    // tone ramps linearly STARt -> STOP in SWEep:TIME, then restarts, repeating (free run).
    tree_.add("[SOURce:]FREQuency:MODE[?]", [this](const Call& c) {
      return choice_setting(c, {"CW", "FIXed", "SWEep"}, sweeping_ ? 2 : 0, [this](std::size_t i) -> std::optional<ScpiError> {
        const bool sweep = i == 2;
        if (sweep != sweeping_) {
          sweeping_ = sweep;
          publish();
        }
        return std::nullopt;
      });
    });
    // STARt/STOP (SCPI-99 Vol 2 SOURce:FREQuency:STARt|STOP): a start above the stop moves the
    // stop up with it, and the other way round, as the receiver's axis does.
    tree_.add("[SOURce:]FREQuency:STARt[?]", [this, flim](const Call& c) {
      return numeric_setting(c, Unit::hertz, flim, sweep_start_hz_, [this](double v) -> std::optional<ScpiError> {
        sweep_start_hz_ = v;
        sweep_stop_hz_ = std::max(sweep_stop_hz_, v);
        publish();
        return std::nullopt;
      });
    });
    tree_.add("[SOURce:]FREQuency:STOP[?]", [this, flim](const Call& c) {
      return numeric_setting(c, Unit::hertz, flim, sweep_stop_hz_, [this](double v) -> std::optional<ScpiError> {
        sweep_stop_hz_ = v;
        sweep_start_hz_ = std::min(sweep_start_hz_, v);
        publish();
        return std::nullopt;
      });
    });
    // SCPI-99 Vol 2 SOURce:SWEep:TIME: one ramp, 1 ms to 1000 s in this model.
    tree_.add("[SOURce:]SWEep:TIME[?]", [this](const Call& c) {
      return numeric_setting(c, Unit::seconds, {1e-3, 1000, 0.01}, sweep_time_s_, [this](double v) -> std::optional<ScpiError> {
        sweep_time_s_ = v;
        publish();
        return std::nullopt;
      });
    });
    tree_.add("[SOURce:]POWer[:LEVel][:IMMediate][:AMPLitude][?]", [this, plim](const Call& c) {
      return numeric_setting(c, Unit::dbm, plim, power_dbm_, [this](double v) -> std::optional<ScpiError> {
        power_dbm_ = v;
        publish();
        return std::nullopt;
      });
    });
    // OUTPut[:STATe]. With RF on, an antenna DUT radiates: keep it shielded on a real bench.
    tree_.add("OUTPut[:STATe][?]", [this](const Call& c) {
      return bool_setting(c, output_on_, [this](bool on) {
        if (on != output_on_) {
          output_on_ = on;
          publish();
        }
      });
    });
  }

  World& world_;
  SourceConfig config_;
  StatusModel status_;
  CommandTree tree_;
  double level_offset_db_ = 0;
  double frequency_hz_ = 1e9;
  double power_dbm_ = -20;
  bool output_on_ = false;
  bool sweeping_ = false;          // FREQuency:MODE SWEep
  double sweep_start_hz_ = 0.9e9;
  double sweep_stop_hz_ = 1.1e9;
  double sweep_time_s_ = 0.01;
};

}  // namespace

std::unique_ptr<SimInstrument> make_source_instrument(World& world, const nlohmann::json& config) {
  return std::make_unique<SourceInstrument>(world, source_config_from_json(config));
}

}  // namespace echoline::sim
