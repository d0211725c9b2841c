#include "simulator/instrument_host.hpp"

#include <spdlog/spdlog.h>

namespace echoline::sim {
namespace {

// Replies can be binary blocks: log a printable prefix only.
std::string printable_prefix(std::string_view text, std::size_t max_chars = 80) {
  std::string out;
  for (char c : text.substr(0, max_chars)) {
    out += (c >= 0x20 && c < 0x7f) ? c : '.';
  }
  if (text.size() > max_chars) out += "...(" + std::to_string(text.size()) + " bytes)";
  return out;
}

std::string fault_names(const std::vector<FaultKind>& kinds) {
  std::string out;
  for (auto k : kinds) {
    if (!out.empty()) out += ",";
    out += to_string(k);
  }
  return out;
}

}  // namespace

InstrumentHost::InstrumentHost(std::unique_ptr<SimInstrument> instrument, World& world, SimClock& clock,
                               const LatencyProfile& profile)
    : instrument_(std::move(instrument)), role_(instrument_->role()), world_(world), clock_(clock), profile_(profile) {}

void InstrumentHost::on_connect(const std::string& peer) {
  ++counters_.connections;
  spdlog::info("{} {}: connected", role_, peer);
}

void InstrumentHost::on_disconnect(const std::string& peer) { spdlog::info("{} {}: disconnected", role_, peer); }

std::vector<Outgoing> InstrumentHost::on_line(std::string_view line, const std::string& peer) {
  ++counters_.messages;
  world_.now_s = clock_.next_message_time();
  spdlog::info("{} {} <- {}", role_, peer, printable_prefix(line, 200));

  for (auto& entry : faults_.on_message()) {
    ++counters_.faults;
    spdlog::warn("{} {}: fault error-entry: pushing {},\"{}\"", role_, peer, entry.code, entry.message);
    instrument_->push_error(entry.code, std::move(entry.message));
  }

  std::vector<Reply> replies = instrument_->handle(line);
  const std::string identity = instrument_->identity();
  std::vector<Outgoing> out;
  for (auto& reply : replies) {
    if (!reply.has_reply) continue;
    clock_.waited(reply.delay_s);
    const bool is_identity = reply.text == identity;
    ReplyPlan plan = faults_.on_reply(std::move(reply.text), is_identity);
    if (!plan.applied.empty()) {
      counters_.faults += plan.applied.size();
      spdlog::warn("{} {}: fault {} on the reply to '{}'", role_, peer, fault_names(plan.applied),
                   printable_prefix(line));
    }
    if (plan.drop_connection) {
      out.push_back(Outgoing{"", 0, true});
      break;
    }
    if (!plan.send) continue;
    ++counters_.replies;
    spdlog::debug("{} {} -> {}", role_, peer, printable_prefix(plan.text));
    const double wait = reply_wait_s(profile_, reply.delay_s) + plan.extra_delay_s;
    out.push_back(Outgoing{std::move(plan.text) + "\n", wait, false});
  }
  return out;
}

}  // namespace echoline::sim
