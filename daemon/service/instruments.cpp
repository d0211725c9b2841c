// Instrument sessions: bring-up (connect, *IDN? check, initialise) and reconnect with backoff.
#include "daemon/service/instruments.hpp"

#include <chrono>
#include <stdexcept>
#include <thread>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

namespace echoline::service {

Instruments::Instruments(const drivers::StationConfig& config) {
  for (const auto& ic : config.instruments) {
    auto e = std::make_unique<Entry>();
    e->config = ic;
    e->profile = drivers::load_profile(ic.profile);
    if (e->profile.role != ic.role) {
      throw std::runtime_error(fmt::format("{}: instrument {} has role {} but its profile {} is for role {}", config.file,
                                           ic.name, ic.role, ic.profile.string(), e->profile.role));
    }
    auto transport = drivers::make_transport(ic.address, ic.name);
    if (!transport) throw std::runtime_error(fmt::format("{}: instrument {}: {}", config.file, ic.name, transport.error().message));
    e->session = std::make_unique<drivers::ScpiSession>(ic.name, std::move(transport.value()), e->profile.io);
    InstrumentHealth h{ic.role, ic.name, ic.address, "", false, "not connected yet"};
    health_[ic.role] = h;
    entries_.push_back(std::move(e));
  }
  for (auto& e : entries_) {
    if (e->config.role == "source" && !source_) {
      source_ = std::make_unique<drivers::Source>(*e->session, e->profile);
      source_profile_ = &e->profile;
    } else if (e->config.role == "receiver" && !receiver_) {
      receiver_ = std::make_unique<drivers::Receiver>(*e->session, e->profile);
      receiver_profile_ = &e->profile;
    } else if (e->config.role == "switch" && !switch_drv_) {
      switch_drv_ = std::make_unique<drivers::Switch>(*e->session, e->profile);
    }
  }
  if (!source_ || !receiver_) {
    throw std::runtime_error(fmt::format("{}: instruments: a source and a receiver are required", config.file));
  }
}

Instruments::~Instruments() { close_all(); }

Status Instruments::source_output_off() {
  drivers::ScpiSession& session = source_->session();
  if (!session.is_open()) {
    if (Status s = session.connect(); !s) return s;
  }
  if (Status s = source_->set_output(false); !s) return s;
  return session.wait_complete();
}

const drivers::Profile& Instruments::source_profile() const { return *source_profile_; }
const drivers::Profile& Instruments::receiver_profile() const { return *receiver_profile_; }

void Instruments::set_health(const Entry& e, bool healthy, const std::string& identity, const std::string& error) {
  std::lock_guard lock(mu_);
  auto& h = health_[e.config.role];
  h.healthy = healthy;
  if (!healthy && !error.empty()) ++h.errors;
  if (healthy && e.up_once) ++h.reconnects;
  if (!identity.empty()) h.identity = identity;
  h.last_error = error;
}

Status Instruments::bring_up(Entry& e) {
  Status s = e.session->is_open() ? e.session->reconnect() : e.session->connect();
  if (!s) return s;
  auto id = drivers::identify_and_verify(*e.session, e.profile);
  if (!id) return id.error();
  const std::string identity = fmt::format("{},{},{},{}", id->manufacturer, id->model, id->serial, id->firmware);
  if (e.config.role == "source") {
    s = source_->initialize();
  } else if (e.config.role == "receiver") {
    s = receiver_->initialize();
  } else if (e.config.role == "switch" && switch_drv_) {
    s = switch_drv_->initialize();
  }
  if (!s) return s;
  set_health(e, true, identity, "");
  e.up_once = true;
  return {};
}

Status Instruments::ensure_ready(int attempts) {
  Status first_failure;
  for (auto& e : entries_) {
    if (e->ready && e->session->is_open()) continue;
    e->ready = false;
    auto delay = std::chrono::milliseconds(100);
    Status s;
    for (int a = 0; a < attempts; ++a) {
      if (a > 0) {
        std::this_thread::sleep_for(delay);
        delay *= 2;
      }
      s = bring_up(*e);
      if (s) break;
      spdlog::warn("{} ({}): bring-up attempt {} of {} failed: {}", e->config.name, e->config.role, a + 1, attempts,
                   s.error().message);
    }
    if (s) {
      e->ready = true;
      spdlog::info("{} ({}) ready at {}", e->config.name, e->config.role, e->config.address);
    } else {
      set_health(*e, false, "", s.error().message);
      if (first_failure) first_failure = s;
    }
  }
  return first_failure;
}

void Instruments::invalidate(const std::string& reason) {
  for (auto& e : entries_) {
    e->ready = false;
    // Errors name the instrument and its address first ("siggen (tcp://...): ..."): the one
    // named is reported unhealthy until the next bring-up succeeds.
    if (!reason.empty() && (reason.find(e->config.name) != std::string::npos ||
                            reason.find(e->config.address) != std::string::npos)) {
      set_health(*e, false, "", reason);
    }
  }
}

void Instruments::close_all() {
  for (auto& e : entries_) {
    e->session->close();
    e->ready = false;
  }
}

std::vector<InstrumentHealth> Instruments::health() const {
  std::lock_guard lock(mu_);
  std::vector<InstrumentHealth> out;
  for (const auto& e : entries_) out.push_back(health_.at(e->config.role));
  return out;
}

std::map<std::string, std::string> Instruments::identities() const {
  std::lock_guard lock(mu_);
  std::map<std::string, std::string> out;
  for (const auto& [role, h] : health_) out[role] = h.identity;
  return out;
}

}  // namespace echoline::service
