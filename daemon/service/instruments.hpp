// The station's instrument sessions: profile, SCPI session and role driver per configured
// instrument; connect with *IDN? verified against the profile, reconnect with backoff, health.
// Threading: connect/ensure_ready/drivers from the one worker thread that runs sweeps;
// health() is safe from any thread (copies under a mutex).
#pragma once

#include <map>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <vector>

#include "drivers/profile.hpp"
#include "drivers/receiver.hpp"
#include "drivers/scpi_session.hpp"
#include "drivers/source.hpp"
#include "drivers/station_config.hpp"
#include "drivers/switch.hpp"

namespace echoline::service {

struct InstrumentHealth {
  std::string role, name, address;
  std::string identity;     // raw-ish "*IDN?" fields joined by ','; "" until identified
  bool healthy = false;
  std::string last_error;
  int errors = 0;           // errors reported against this instrument since the daemon started
  int reconnects = 0;       // successful bring-ups after the first one
};

class Instruments {
 public:
  // Loads every profile (throws drivers::ConfigError) and builds transports (throws
  // std::runtime_error on a bad address). Requires a source and a receiver.
  explicit Instruments(const drivers::StationConfig& config);
  ~Instruments();
  Instruments(const Instruments&) = delete;
  Instruments& operator=(const Instruments&) = delete;

  // Connects, verifies identity and initialises every instrument not ready; a failing one is
  // retried with backoff (attempts, first delay doubling). Returns the first failure.
  Status ensure_ready(int attempts = 3);
  // Marks every instrument for a fresh connect on the next ensure_ready (after an error); the
  // instrument the reason names is reported unhealthy with it until it is back.
  void invalidate(const std::string& reason = "");
  // Closes every session (source output is the engine's job; this only drops links).
  void close_all();
  // SAFETY: connects the source alone and switches its RF output OFF, confirmed by *OPC?. For
  // when no daemon drives the station (after a crash, from the service manager); touches no
  // other instrument and no other setting.
  Status source_output_off();

  drivers::Source& source() { return *source_; }
  drivers::Receiver& receiver() { return *receiver_; }
  drivers::Switch* switch_() { return switch_drv_.get(); }
  const drivers::Profile& source_profile() const;
  const drivers::Profile& receiver_profile() const;

  std::vector<InstrumentHealth> health() const;
  std::map<std::string, std::string> identities() const;   // role -> identity text

 private:
  struct Entry {
    drivers::InstrumentConfig config;
    drivers::Profile profile;
    std::unique_ptr<drivers::ScpiSession> session;
    bool ready = false;
    bool up_once = false;   // brought up at least once (a later bring-up is a reconnect)
  };
  Status bring_up(Entry& e);
  void set_health(const Entry& e, bool healthy, const std::string& identity, const std::string& error);

  std::vector<std::unique_ptr<Entry>> entries_;
  std::unique_ptr<drivers::Source> source_;
  std::unique_ptr<drivers::Receiver> receiver_;
  std::unique_ptr<drivers::Switch> switch_drv_;
  const drivers::Profile* source_profile_ = nullptr;
  const drivers::Profile* receiver_profile_ = nullptr;

  mutable std::mutex mu_;
  std::map<std::string, InstrumentHealth> health_;   // by role
};

}  // namespace echoline::service
