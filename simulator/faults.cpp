#include "simulator/faults.hpp"

#include <algorithm>
#include <array>

namespace echoline::sim {
namespace {

struct KindName {
  FaultKind kind;
  std::string_view name;
};
constexpr std::array<KindName, 6> kKindNames{{
    {FaultKind::no_reply, "no-reply"},
    {FaultKind::slow_reply, "slow-reply"},
    {FaultKind::drop, "drop"},
    {FaultKind::garble, "garble"},
    {FaultKind::error_entry, "error-entry"},
    {FaultKind::wrong_identity, "wrong-identity"},
}};

// Replacement characters for garbling: printable, none of them a terminator, a digit or a
// separator a number parser could accept, so a garbled number never parses as another number.
constexpr std::string_view kGarbleChars = "?#@~%&!$^";

}  // namespace

std::string_view to_string(FaultKind kind) {
  for (const auto& k : kKindNames) {
    if (k.kind == kind) return k.name;
  }
  return "unknown";
}

std::optional<FaultKind> parse_fault_kind(std::string_view text) {
  for (const auto& k : kKindNames) {
    if (k.name == text) return k.kind;
  }
  return std::nullopt;
}

std::string fault_kind_names() {
  std::string out;
  for (const auto& k : kKindNames) {
    if (!out.empty()) out += ", ";
    out += k.name;
  }
  return out;
}

void FaultSet::arm(const FaultSpec& spec) {
  Armed armed{spec, std::mt19937_64(spec.seed), 0};
  if (Armed* existing = find(spec.kind)) {
    *existing = std::move(armed);
  } else {
    armed_.push_back(std::move(armed));
  }
}

void FaultSet::disarm(FaultKind kind) {
  armed_.erase(std::remove_if(armed_.begin(), armed_.end(),
                              [kind](const Armed& a) { return a.spec.kind == kind; }),
               armed_.end());
}

void FaultSet::clear() { armed_.clear(); }

std::vector<FaultSpec> FaultSet::specs() const {
  std::vector<FaultSpec> out;
  for (const auto& a : armed_) out.push_back(a.spec);
  return out;
}

std::uint64_t FaultSet::fired(FaultKind kind) const {
  for (const auto& a : armed_) {
    if (a.spec.kind == kind) return a.fired;
  }
  return 0;
}

FaultSet::Armed* FaultSet::find(FaultKind kind) {
  for (auto& a : armed_) {
    if (a.spec.kind == kind) return &a;
  }
  return nullptr;
}

bool FaultSet::roll(Armed& armed) {
  // 53 random bits -> [0, 1): the same on every standard library (unlike uniform_real_distribution).
  const double u = static_cast<double>(armed.rng() >> 11) * 0x1.0p-53;
  const bool fire = u < armed.spec.probability;
  if (fire) ++armed.fired;
  return fire;
}

void FaultSet::garble(std::string& text, std::mt19937_64& rng) {
  if (text.empty()) {
    text = "?";
    return;
  }
  // Replace about one character in eight, at least one; the first character always, so a
  // block header '#' or a leading digit cannot survive intact.
  const std::size_t count = std::max<std::size_t>(1, text.size() / 8);
  text[0] = kGarbleChars[rng() % kGarbleChars.size()];
  for (std::size_t i = 1; i < count; ++i) {
    const std::size_t at = static_cast<std::size_t>(rng() % text.size());
    text[at] = kGarbleChars[rng() % kGarbleChars.size()];
  }
}

std::vector<ErrorEntry> FaultSet::on_message() {
  std::vector<ErrorEntry> out;
  if (Armed* a = find(FaultKind::error_entry); a != nullptr && roll(*a)) {
    out.push_back({a->spec.error_code, a->spec.error_message});
  }
  return out;
}

ReplyPlan FaultSet::on_reply(std::string text, bool is_identity) {
  ReplyPlan plan;
  plan.text = std::move(text);
  // Order: a lost link or lost reply beats everything; then what the reply says; then when.
  if (Armed* a = find(FaultKind::drop); a != nullptr && roll(*a)) {
    plan.send = false;
    plan.drop_connection = true;
    plan.applied.push_back(FaultKind::drop);
    return plan;
  }
  if (Armed* a = find(FaultKind::no_reply); a != nullptr && roll(*a)) {
    plan.send = false;
    plan.applied.push_back(FaultKind::no_reply);
    return plan;
  }
  if (is_identity) {
    if (Armed* a = find(FaultKind::wrong_identity); a != nullptr && roll(*a)) {
      plan.text = a->spec.identity;
      plan.applied.push_back(FaultKind::wrong_identity);
    }
  }
  if (Armed* a = find(FaultKind::garble); a != nullptr && roll(*a)) {
    garble(plan.text, a->rng);
    plan.applied.push_back(FaultKind::garble);
  }
  if (Armed* a = find(FaultKind::slow_reply); a != nullptr && roll(*a)) {
    plan.extra_delay_s = a->spec.delay_ms / 1000.0;
    plan.applied.push_back(FaultKind::slow_reply);
  }
  return plan;
}

}  // namespace echoline::sim
