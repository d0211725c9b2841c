// The operator loop for reliability runs (lot_runner.hpp).
#include "tests/soak/lot_runner.hpp"

#include <algorithm>
#include <chrono>
#include <thread>

#include <fmt/format.h>

namespace echoline::soak {

using nlohmann::json;

LotRunner::LotRunner(StationUnderTest& station, LotCounters& counters) : st_(station), c_(counters) {}

bool LotRunner::calibrate(int attempts) {
  for (int i = 0; i < attempts; ++i) {
    std::string why;
    auto cal = st_.calibrate(&why);
    if (cal && cal->value("valid", false)) {
      ++c_.calibrations;
      return true;
    }
    ++c_.calibration_failures;
    if (cal) why = "calibration not valid: " + cal->dump();
    if (why.find("busy") != std::string::npos) std::this_thread::sleep_for(std::chrono::milliseconds(200));
    std::fprintf(stderr, "soak: calibration attempt %d failed: %s\n", i + 1, why.c_str());
  }
  return false;
}

bool LotRunner::handle_refusal(const UnitOutcome& o) {
  if (o.refusal == "calibration_due") return calibrate();
  if (o.refusal == "check_due") {
    for (int i = 0; i < 5; ++i) {
      std::string why;
      if (st_.check_standard(&why)) {
        ++c_.checks;
        // A drifted check makes the calibration due; the next test.start says so.
        return true;
      }
      ++c_.check_failures;
      std::fprintf(stderr, "soak: check standard attempt %d failed: %s\n", i + 1, why.c_str());
    }
    return false;
  }
  if (o.refusal == "busy") {
    std::this_thread::sleep_for(std::chrono::milliseconds(200));
    return true;
  }
  return false;
}

std::string LotRunner::test(const std::string& serial, double kill_after_s) {
  if (!seen_[serial]) {
    seen_[serial] = true;
    order_.push_back(serial);
    ++c_.units_tested;
  }
  int attempts = 0;
  for (int guard = 0; guard < 20; ++guard) {
    UnitOutcome o = st_.test_unit(serial, kill_after_s);
    if (!o.refusal.empty()) {
      if (!handle_refusal(o)) {
        c_.problems.push_back(fmt::format("{}: test.start refused ({}: {}) and the refusal could not be cleared", serial,
                                          o.refusal, o.reason));
        return "";
      }
      continue;
    }
    if (o.verdict.empty()) {
      // Stopped early on purpose (kill point) or the link dropped: the caller decides.
      if (!(kill_after_s > 0)) {
        ++c_.lost_links;
        c_.problems.push_back(fmt::format("{}: no result from the daemon: {}", serial, o.reason));
      }
      return "";
    }
    ++c_.results;
    ++attempts;
    if (o.verdict == "aborted") {
      ++c_.aborted;
      if (attempts <= 2) {
        ++c_.retries;
        continue;
      }
      ++c_.units_never_judged;
    }
    ++c_.verdicts[o.verdict];
    return o.verdict;
  }
  c_.problems.push_back(fmt::format("{}: gave up after 20 refusals", serial));
  return "";
}

void LotRunner::measure_unit_traffic(const std::string& serial) {
  json before = st_.control({{"cmd", "status"}})["instruments"];
  const std::string verdict = test(serial);
  json after = st_.control({{"cmd", "status"}})["instruments"];
  for (const char* role : {"source", "receiver"}) {
    replies_per_unit_[role] = after[role].value("replies", 0.0) - before[role].value("replies", 0.0);
    messages_per_unit_[role] = after[role].value("messages", 0.0) - before[role].value("messages", 0.0);
  }
  std::printf("traffic of one unit (%s, %s): source %.0f messages %.0f replies, receiver %.0f messages %.0f replies\n",
              serial.c_str(), verdict.c_str(), messages_per_unit_["source"], replies_per_unit_["source"],
              messages_per_unit_["receiver"], replies_per_unit_["receiver"]);
}

void LotRunner::arm_faults(const FaultPlan& plan) {
  std::uint64_t seed = plan.seed;
  for (const char* role : {"source", "receiver"}) {
    // Half of each per-unit rate on each instrument; a rate r spread over n rolls is r/n per roll.
    const double replies = std::max(1.0, replies_per_unit_[role]);
    const double messages = std::max(1.0, messages_per_unit_[role]);
    auto per = [&](double rate, double rolls) { return std::min(1.0, rate * plan.scale / 2 / rolls); };
    st_.arm_fault(role, "no-reply", per(plan.no_reply, replies), seed++);
    st_.arm_fault(role, "drop", per(plan.drop, replies), seed++);
    st_.arm_fault(role, "garble", per(plan.garble, replies), seed++);
    st_.arm_fault(role, "error-entry", per(plan.error_entry, messages), seed++);
    st_.arm_fault(role, "slow-reply", per(plan.slow_reply, replies), seed++, plan.slow_delay_ms);
  }
}

}  // namespace echoline::soak
