#include "simulator/server.hpp"

#include <csignal>
#include <map>
#include <stdexcept>

#include <asio.hpp>
#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "drivers/config_error.hpp"
#include "simulator/control_port.hpp"
#include "simulator/instrument.hpp"
#include "simulator/instrument_host.hpp"
#include "simulator/pty_endpoint.hpp"
#include "simulator/tcp_endpoint.hpp"

namespace echoline::sim {
namespace {

std::unique_ptr<SimInstrument> make_instrument(World& world, const SimConfig& config, const InstrumentConfig& inst) {
  try {
    if (inst.role == "source") return make_source_instrument(world, inst.settings);
    if (inst.role == "receiver") return make_receiver_instrument(world, inst.settings);
    if (inst.role == "switch") return make_switch_instrument(world, inst.settings);
  } catch (const std::exception& e) {
    throw drivers::ConfigError(config.file, inst.settings_line, inst.key + "/settings", e.what());
  }
  throw drivers::ConfigError(config.file, 0, inst.key, "unknown role \"" + inst.role + "\"");
}

}  // namespace

struct Server::Impl {
  explicit Impl(SimConfig c, std::optional<Lot> l)
      : config(std::move(c)), lot(std::move(l)), clock(config.latency), signals(io, SIGTERM, SIGINT) {}

  SimConfig config;
  std::optional<Lot> lot;
  asio::io_context io{1};
  World world;
  SimClock clock;
  std::vector<std::unique_ptr<InstrumentHost>> hosts;
  std::unique_ptr<ControlService> control;
  struct Listed {
    std::string role;
    std::unique_ptr<TcpEndpoint> tcp;
    std::unique_ptr<PtyEndpoint> pty;
  };
  std::vector<Listed> endpoints;
  asio::signal_set signals;
  bool stopping = false;

  void open_endpoints(LineService& service, const EndpointConfig& e) {
    if (e.tcp) endpoints.push_back(Listed{service.role(), std::make_unique<TcpEndpoint>(io, e.host, e.port, service), nullptr});
    if (e.pty) endpoints.push_back(Listed{service.role(), nullptr, std::make_unique<PtyEndpoint>(io, service, e.link, e.baud)});
  }

  void stop() {
    if (stopping) return;
    stopping = true;
    spdlog::info("stopping: closing endpoints");
    asio::error_code ec;
    signals.cancel(ec);
    for (auto& e : endpoints) {
      if (e.tcp) e.tcp->stop();
      if (e.pty) e.pty->stop();
    }
    // run() drains what the closes left pending (bounded), then returns.
    io.stop();
  }
};

Server::Server(SimConfig config, std::optional<Lot> lot) : impl_(std::make_unique<Impl>(std::move(config), std::move(lot))) {
  Impl& s = *impl_;
  s.world.bench = s.config.bench;
  s.world.trigger_cable = s.config.trigger_cable.present;
  s.world.trigger_latency_s = s.config.trigger_cable.latency_s;
  s.world.trigger_jitter_s = s.config.trigger_cable.jitter_s;
  s.world.standards = s.config.standards;  // a switch's "load_return_loss_db" may replace the LOAD's (it agrees)
  s.world.lot = s.lot ? &*s.lot : nullptr;

  std::map<std::string, InstrumentHost*> by_role;
  for (const auto& inst : s.config.instruments) {
    auto host = std::make_unique<InstrumentHost>(make_instrument(s.world, s.config, inst), s.world, s.clock, s.config.latency);
    for (const auto& spec : inst.faults) host->faults().arm(spec);
    by_role[inst.role] = host.get();
    s.hosts.push_back(std::move(host));
  }
  s.control = std::make_unique<ControlService>(s.world, s.world.lot, by_role, s.clock, s.config.latency.name);

  for (std::size_t i = 0; i < s.hosts.size(); ++i) s.open_endpoints(*s.hosts[i], s.config.instruments[i].endpoints);
  s.open_endpoints(*s.control, s.config.control);
}

Server::~Server() = default;

std::vector<std::string> Server::endpoint_lines() const {
  std::vector<std::string> lines;
  for (const auto& e : impl_->endpoints) {
    if (e.tcp) lines.push_back(fmt::format("endpoint role={} transport=tcp address={}", e.role, e.tcp->address()));
    if (e.pty) {
      std::string line = fmt::format("endpoint role={} transport=pty address={}", e.role, e.pty->address());
      if (!e.pty->link().empty()) line += " link=" + e.pty->link();
      lines.push_back(std::move(line));
    }
  }
  return lines;
}

int Server::run() {
  Impl& s = *impl_;
  s.signals.async_wait([&s](asio::error_code ec, int signal_number) {
    if (ec) return;
    spdlog::info("signal {} received", signal_number);
    s.stop();
  });
  for (auto& e : s.endpoints) {
    if (e.tcp) e.tcp->start();
    if (e.pty) e.pty->start();
  }
  spdlog::info("serving ({} profile{}{})", s.config.latency.name, s.lot ? ", lot " : "", s.lot ? s.lot->name : "");
  s.io.run();
  // Let the closed connections finish their handlers; never hang on the way out.
  s.io.restart();
  s.io.run_for(std::chrono::seconds(2));
  spdlog::info("stopped");
  return 0;
}

void Server::stop() {
  asio::post(impl_->io, [this]() { impl_->stop(); });
}

}  // namespace echoline::sim
