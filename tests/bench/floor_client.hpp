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
  // What the sweep engine sends per point with the sim profiles (end-of-sweep error checks),
  // one exchange after the other: source FREQ:CW + *OPC?; receiver FREQ:CENT, INIT:IMM, *OPC?,
  // CALC:MARK1:MAX;:CALC:MARK1:Y? -> 3 writes, 3 queries; errors read once after the sweep.
  // (The engine overlaps the source's exchange with the receiver's marker query; this does not.)
  engine_exchanges,
  // The same 3 queries in the fewest messages (FREQ:CENT;:INIT:IMM;*OPC? as one): 1 write,
  // 3 queries per point.
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
