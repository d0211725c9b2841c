// The loopback floor: the SCPI exchanges one step-sweep point needs, sent by a bare ScpiSession
// per instrument with nothing else around them (no drivers, no daemon, no events, no store).
// One thread; owns its sessions. Throws std::runtime_error naming the instrument on failure.
#pragma once

#include <memory>
#include <string>
#include <vector>

#include "drivers/scpi_session.hpp"

namespace echoline::bench {

enum class FloorPlan {
  // Exactly what the sweep engine sends per point with the sim profiles (each-step error
  // checks): 4 writes and 8 queries (source 2, receiver 6).
  engine_exchanges,
  // Only what a point cannot do without: source set + *OPC?, receiver center + INIT + *OPC?,
  // peak + marker Y? as one message each: 3 queries, errors checked once at the end.
  lean,
};

class FloorClient {
 public:
  FloorClient(const std::string& source_address, const std::string& receiver_address);
  FloorClient(const FloorClient&) = delete;
  FloorClient& operator=(const FloorClient&) = delete;

  // Sweeps the plan once (output ON at -10 dBm, OFF after); returns seconds for the points only.
  double sweep(const std::vector<double>& plan_hz, double settle_s, FloorPlan mode);

 private:
  std::unique_ptr<drivers::ScpiSession> source_, receiver_;
};

}  // namespace echoline::bench
