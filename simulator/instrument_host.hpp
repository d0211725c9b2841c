// InstrumentHost: puts one SimInstrument on the wire. For each received program message it sets
// the sim clock, lets armed faults act, calls the instrument, logs the command, and turns each
// Reply into bytes with the wait the latency profile asks for. Pure (no Asio); logs via spdlog.
// Threading: single-threaded (the server's io thread); shares the World with the other hosts.
#pragma once

#include <cstdint>
#include <memory>
#include <string>

#include "simulator/faults.hpp"
#include "simulator/instrument.hpp"
#include "simulator/latency.hpp"
#include "simulator/line_service.hpp"

namespace echoline::sim {

struct HostCounters {
  std::uint64_t messages = 0;      // program messages received
  std::uint64_t replies = 0;       // replies sent (or scheduled)
  std::uint64_t faults = 0;        // fault firings of any kind
  std::uint64_t connections = 0;   // connections opened so far
};

class InstrumentHost final : public LineService {
 public:
  // REQUIRES: world, clock and profile outlive the host.
  InstrumentHost(std::unique_ptr<SimInstrument> instrument, World& world, SimClock& clock,
                 const LatencyProfile& profile);

  std::vector<Outgoing> on_line(std::string_view line, const std::string& peer) override;
  const std::string& role() const override { return role_; }
  void on_connect(const std::string& peer) override;
  void on_disconnect(const std::string& peer) override;

  FaultSet& faults() { return faults_; }
  const FaultSet& faults() const { return faults_; }
  const HostCounters& counters() const { return counters_; }
  SimInstrument& instrument() { return *instrument_; }

 private:
  std::unique_ptr<SimInstrument> instrument_;
  std::string role_;
  World& world_;
  SimClock& clock_;
  const LatencyProfile& profile_;
  FaultSet faults_;
  HostCounters counters_;
};

}  // namespace echoline::sim
