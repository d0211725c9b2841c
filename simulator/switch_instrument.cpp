// Simulated calibration switch: see switch_instrument.hpp and instrument.hpp.
#include "simulator/switch_instrument.hpp"

#include <charconv>
#include <stdexcept>

#include <nlohmann/json.hpp>

#include "simulator/command_tree.hpp"
#include "simulator/instrument.hpp"
#include "simulator/physics/dut_models.hpp"

namespace echoline::sim {

bool is_dut_arm(const std::string& position) { return position == "DUT" || position == "DUT-OFFSET"; }

SwitchConfig switch_config_from_json(const nlohmann::json& config) {
  SwitchConfig c;
  c.identity = detail::config_identity(config, c.identity);
  if (config.is_object() && config.contains("load_return_loss_db")) {
    c.load_return_loss_db = detail::config_number(config, "load_return_loss_db", 42);
    if (!(*c.load_return_loss_db >= 6 && *c.load_return_loss_db <= 80)) {
      throw std::invalid_argument("instrument settings: \"load_return_loss_db\": must be 6 .. 80 dB");
    }
  }
  if (config.is_object() && config.contains("positions")) {
    const auto& p = config.at("positions");
    if (!p.is_object() || p.empty())
      throw std::invalid_argument(
          "instrument settings: \"positions\": must be an object {\"<channel>\": \"OPEN|SHORT|LOAD|MISMATCH-A|MISMATCH-B|DUT|DUT-OFFSET\"}");
    c.positions.clear();
    for (const auto& [key, value] : p.items()) {
      int channel = 0;
      auto [ptr, ec] = std::from_chars(key.data(), key.data() + key.size(), channel);
      if (ec != std::errc() || ptr != key.data() + key.size() || channel < 1 || channel > 9999)
        throw std::invalid_argument("instrument settings: \"positions\": key \"" + key + "\" is not a channel number 1..9999");
      if (!value.is_string()) throw std::invalid_argument("instrument settings: \"positions/" + key + "\": must be a string");
      const std::string what = value.get<std::string>();
      if (!is_dut_arm(what) && !make_standard(what))
        throw std::invalid_argument("instrument settings: \"positions/" + key + "\": \"" + what +
                                    "\" is not DUT, DUT-OFFSET or a standard (" + standard_names() + ")");
      c.positions[channel] = what;
    }
  }
  return c;
}

namespace {

class SwitchInstrument final : public SimInstrument {
 public:
  SwitchInstrument(World& world, SwitchConfig config) : world_(world), config_(std::move(config)) {
    if (config_.load_return_loss_db) world_.standards.load_return_loss_db = *config_.load_return_loss_db;
    add_common_commands(tree_, status_, CommonHooks{[this] { return config_.identity; }, [] { /* *RST keeps the position */ }});
    add_commands();
  }

  std::vector<Reply> handle(std::string_view message) override { return tree_.execute(message, status_, world_.now_s); }
  std::string role() const override { return "switch"; }
  std::string identity() const override { return config_.identity; }
  void query_interrupted() override { status_.push_error(-410); }
  void query_unterminated() override { status_.push_error(-420); }
  void push_error(int code, std::string message) override { status_.push_error_message(code, std::move(message)); }

 private:
  // Connects a position. A standard displaces whatever the control port put in the DUT
  // socket; DUT brings it back (if nobody connected something else meanwhile), DUT-OFFSET the
  // same behind the offset line.
  void select(int channel) {
    const std::string& what = config_.positions.at(channel);
    const bool ours = world_.connected_name == placed_name_ && !placed_name_.empty();
    if (is_dut_arm(what)) {
      if (ours || (!world_.connected && parked_)) {
        world_.connected = std::move(parked_);
        world_.connected_name = parked_name_;
      }
      parked_name_.clear();
      placed_name_.clear();
      world_.via_offset_line = what == "DUT-OFFSET";
    } else {
      if (!ours) {  // keep what sits in the DUT socket
        parked_ = std::move(world_.connected);
        parked_name_ = world_.connected_name;
      }
      world_.connected = make_standard(what, world_.standards);
      world_.connected_name = what;
      placed_name_ = what;
      world_.via_offset_line = false;
    }
    closed_ = channel;
  }

  std::optional<ScpiError> check_channels(const Call& c) {
    if (auto e = check_param_count(c, 1, 1)) return e;
    const Parameter& p = c.params()[0];
    if (p.kind != Parameter::Kind::channel_list) return ScpiError{-104, c.unit.header_text + " needs a channel list like (@1)"};
    for (int ch : p.channels) {
      if (!config_.positions.count(ch)) return ScpiError{-222, c.unit.header_text + " channel " + std::to_string(ch) + " does not exist"};
    }
    return std::nullopt;
  }

  void add_commands() {
    // SCPI-99 Vol 2 ROUTe:CLOSe <channel_list> / ROUTe:CLOSe? <channel_list> (from memory)
    tree_.add("ROUTe:CLOSe[?]", [this](const Call& c) {
      if (auto e = check_channels(c)) return Outcome::fail(*e);
      const auto& chans = c.params()[0].channels;
      if (c.query) {
        std::string out;
        for (std::size_t i = 0; i < chans.size(); ++i) out += (i ? "," : "") + std::string(chans[i] == closed_ ? "1" : "0");
        return Outcome::text(out);
      }
      if (chans.size() != 1) return Outcome::fail(-221, "ROUTe:CLOSe: one channel at a time (single-pole switch)");
      select(chans[0]);
      return Outcome::done();
    });
    tree_.add("ROUTe:OPEN[?]", [this](const Call& c) {
      if (auto e = check_channels(c)) return Outcome::fail(*e);
      const auto& chans = c.params()[0].channels;
      if (c.query) {
        std::string out;
        for (std::size_t i = 0; i < chans.size(); ++i) out += (i ? "," : "") + std::string(chans[i] == closed_ ? "0" : "1");
        return Outcome::text(out);
      }
      for (int ch : chans) {
        if (ch != closed_) continue;
        // Opening the closed throw leaves the test port unterminated (reads like OPEN).
        if (world_.connected_name == placed_name_ && !placed_name_.empty()) {
          world_.connected.reset();
          world_.connected_name.clear();
          placed_name_.clear();
          world_.via_offset_line = false;
        } else if (is_dut_arm(config_.positions.at(ch))) {
          parked_ = std::move(world_.connected);
          parked_name_ = world_.connected_name;
          world_.connected_name.clear();
          placed_name_.clear();
          world_.via_offset_line = false;
        }
        closed_ = 0;
      }
      return Outcome::done();
    });
  }

  World& world_;
  SwitchConfig config_;
  StatusModel status_;
  CommandTree tree_;
  int closed_ = 0;                 // 0 = none
  std::unique_ptr<Dut> parked_;    // what sat in the DUT socket while a standard is selected
  std::string parked_name_;
  std::string placed_name_;        // the standard this switch connected
};

}  // namespace

std::unique_ptr<SimInstrument> make_switch_instrument(World& world, const nlohmann::json& config) {
  return std::make_unique<SwitchInstrument>(world, switch_config_from_json(config));
}

}  // namespace echoline::sim
