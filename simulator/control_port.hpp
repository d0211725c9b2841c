// The fixture control port's protocol: JSON lines, one request -> one reply line with "ok":
// connects standards and lot units (directly or behind the offset line), reports ground truth,
// arms and clears faults, reports status. Pure (no Asio); single-threaded (the server's io thread).
#pragma once

#include <map>
#include <string>

#include <nlohmann/json.hpp>

#include "simulator/instrument_host.hpp"
#include "simulator/line_service.hpp"
#include "simulator/physics/lot.hpp"
#include "simulator/world.hpp"

namespace echoline::sim {

// Requests (see simulator/README.md for the full list):
//   {"cmd":"connect","standard":"OPEN"|"SHORT"|"LOAD"|"MISMATCH-A"|"MISMATCH-B"}  {"cmd":"connect","unit":"<serial>"}
//   {"cmd":"connect","unit":"<serial>","via":"offset-line"}: the unit behind the offset line
//     (World::standards.offset_line), as the switch's DUT-OFFSET arm; without "via", directly.
//     "truth" stays the unit's own reflection.
//   {"cmd":"disconnect"}  {"cmd":"units"}  {"cmd":"status"}
//   {"cmd":"truth","unit":"<serial>","frequencies_hz":[...]}
//   {"cmd":"fault","role":"source","kind":"garble","probability":0.5,"seed":1,"delay_ms":500}
//   {"cmd":"clear-faults"[,"role":"receiver"][,"kind":"garble"]}
class ControlService final : public LineService {
 public:
  // REQUIRES: world, hosts, clock outlive the service; lot may be null (no lot loaded).
  // The standards it connects are World::standards.
  ControlService(World& world, const Lot* lot, std::map<std::string, InstrumentHost*> hosts,
                 const SimClock& clock, std::string profile_name);

  std::vector<Outgoing> on_line(std::string_view line, const std::string& peer) override;
  const std::string& role() const override { return role_; }

  // One request -> one reply object (also used by tests without a socket).
  nlohmann::json handle(std::string_view line);

 private:
  nlohmann::json connect(const nlohmann::json& req);
  nlohmann::json truth(const nlohmann::json& req);
  nlohmann::json fault(const nlohmann::json& req);
  nlohmann::json clear_faults(const nlohmann::json& req);
  nlohmann::json status() const;
  const SimUnit* unit_of(const nlohmann::json& req, std::string& error) const;

  std::string role_ = "control";
  World& world_;
  const Lot* lot_;
  std::map<std::string, InstrumentHost*> hosts_;
  const SimClock& clock_;
  std::string profile_name_;
  std::uint64_t requests_ = 0;
};

}  // namespace echoline::sim
