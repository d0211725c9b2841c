// The fixture figures of the demo station (config/station.jsonc "fixture"): coupler and cable
// for tests and benchmarks that plan or judge as that station would. Plain values.
#pragma once

#include "drivers/station_config.hpp"

namespace echoline::testing {

inline drivers::FixtureConfig demo_fixture() {
  drivers::FixtureConfig fx;
  fx.coupling_db = 20;
  fx.mainline_loss_db = 0.5;
  fx.cable_loss_db = 0.3;
  fx.source_match_db = 25;
  fx.nominal_directivity_db = 30;
  fx.test_port_delay_ns = 2;
  return fx;
}

}  // namespace echoline::testing
