// Test support for the simulator's in-process tests: a ControlService over the tiny lot with
// its world and clock (no socket), and the text of a config error from parse_sim_config.
#pragma once

#include <string>

#include <gtest/gtest.h>

#include "drivers/config_error.hpp"
#include "simulator/control_port.hpp"
#include "simulator/physics/lot.hpp"
#include "simulator/sim_config.hpp"
#include "tests/simulator/sim_fixture.hpp"

namespace echoline::sim::testing {

class ControlServiceFixture : public ::testing::Test {
 protected:
  ControlServiceFixture()
      : lot_(load_lot(repo_file("config/sim/lots/tiny-lot.jsonc"))),
        clock_(*latency_profile("instant")),
        control_(world_, &lot_, {}, clock_, "instant") {
    world_.lot = &lot_;
  }
  json ask(const json& req) { return control_.handle(req.dump()); }

  Lot lot_;
  World world_;
  SimClock clock_;
  ControlService control_;
};

// "" when `text` is a valid simulator config; else the error (file, line, key and why).
inline std::string sim_config_error(const std::string& text) {
  try {
    parse_sim_config(text, "sim.jsonc");
  } catch (const drivers::ConfigError& e) {
    return e.what();
  }
  return "";
}

}  // namespace echoline::sim::testing
