// Loopback floor client: the per-point SCPI of a step sweep on bare sessions. The command text
// is the sim profiles' (config/instruments/sim-*.jsonc); numbers formatted as the drivers do.
#include "tests/bench/floor_client.hpp"

#include <chrono>
#include <stdexcept>
#include <thread>

#include <fmt/format.h>

#include "drivers/scpi_codec.hpp"
#include "drivers/transport.hpp"

namespace echoline::bench {
namespace {

using Clock = std::chrono::steady_clock;

std::unique_ptr<drivers::ScpiSession> open_session(const std::string& name, const std::string& address) {
  auto t = drivers::make_transport(address, name);
  if (!t) throw std::runtime_error(t.error().message);
  auto s = std::make_unique<drivers::ScpiSession>(name, std::move(*t));
  if (Status c = s->connect(); !c) throw std::runtime_error(c.error().message);
  return s;
}

void check(const Status& s) {
  if (!s) throw std::runtime_error(s.error().message);
}

template <class T>
T check(Result<T> r) {
  if (!r) throw std::runtime_error(r.error().message);
  return std::move(*r);
}

void settle(double seconds) {
  if (seconds > 0) std::this_thread::sleep_for(std::chrono::duration<double>(seconds));
}

}  // namespace

FloorClient::FloorClient(const std::string& source_address, const std::string& receiver_address)
    : source_(open_session("floor-source", source_address)), receiver_(open_session("floor-receiver", receiver_address)) {}

double FloorClient::sweep(const std::vector<double>& plan_hz, double settle_s, FloorPlan mode) {
  {  // setup, not timed
    check(receiver_->write("INIT:CONT OFF"));
    check(receiver_->write(fmt::format("FREQ:SPAN {}", scpi::format_number(100e3))));
    check(receiver_->write(fmt::format("BAND {}", scpi::format_number(10e3))));
    check(receiver_->write(fmt::format("BAND:VID {}", scpi::format_number(10e3))));
    check(receiver_->write("CALC:MARK1:STAT ON"));
    check(source_->write(fmt::format("POW {}", scpi::format_number(-10))));
    check(source_->write("OUTP ON"));
    check(source_->drain_errors());
    check(receiver_->drain_errors());
  }
  const auto t0 = Clock::now();
  for (double f : plan_hz) {
    const std::string ftext = scpi::format_number(f);
    if (mode == FloorPlan::engine_exchanges) {
      check(source_->write("FREQ:CW " + ftext));
      check(source_->wait_complete());
      settle(settle_s);
      check(receiver_->write("FREQ:CENT " + ftext));
      check(receiver_->write("INIT:IMM"));
      check(receiver_->wait_complete());
      (void)check(receiver_->query_number("CALC:MARK1:MAX;:CALC:MARK1:Y?"));
    } else {
      check(source_->write("FREQ:CW " + ftext));
      check(source_->wait_complete());
      settle(settle_s);
      (void)check(receiver_->query("FREQ:CENT " + ftext + ";:INIT:IMM;*OPC?"));
      (void)check(receiver_->query_number("CALC:MARK1:MAX;:CALC:MARK1:Y?"));
    }
  }
  const double seconds = std::chrono::duration<double>(Clock::now() - t0).count();
  check(source_->drain_errors());
  check(receiver_->drain_errors());
  check(source_->write("OUTP OFF"));
  check(source_->wait_complete());
  return seconds;
}

}  // namespace echoline::bench
