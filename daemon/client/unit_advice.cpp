#include "daemon/client/unit_advice.hpp"

#include <cmath>

#include <fmt/format.h>

#include "daemon/core/decision.hpp"

namespace echoline::client {

using nlohmann::json;

namespace {

std::optional<double> number(const json& obj, const char* key) {
  if (!obj.is_object()) return std::nullopt;
  auto it = obj.find(key);
  if (it == obj.end() || !it->is_number()) return std::nullopt;
  return it->get<double>();
}

}  // namespace

UnitAdvice advise(const json& run, bool inconclusive_before) {
  const std::string verdict = run.value("verdict", "aborted");
  const std::string cls = run.value("failure_class", "");
  const json trim = run.contains("trim") ? run["trim"] : json();
  if (verdict == "pass") return {"Put it in the PASS tray.", ""};
  if (verdict == "inconclusive") {
    if (run.value("reason", "").find(core::kRetestCannotSettle) != std::string::npos) {
      return {"Set it aside for engineering: a retest on this bench cannot decide it.",
              "Label it with the serial; the bench's coupler and standards, not the connection, leave it undecided."};
    }
    if (inconclusive_before) {
      return {"Inconclusive twice: set it aside for engineering.", "Label it with the serial and leave it out of both trays."};
    }
    return {"Retest once; if inconclusive again, set it aside for engineering.",
            "Check the connection at the test port, reconnect the unit and scan it again."};
  }
  if (verdict == "fail") {
    const auto change = number(trim, "change_mm");
    if (change && *change < 0) {
      return {fmt::format("Put it in the REWORK tray: cut {:.1f} mm from the element.", -*change),
              "After trimming, scan it again."};
    }
    if (change && *change > 0) {
      return {fmt::format("Put it in the REJECT tray: the element is {:.1f} mm too short (cannot be lengthened).", *change),
              ""};
    }
    if (cls == "no-response" && run.value("reason", "").find(core::kIntermittentTrace) != std::string::npos) {
      // A loose seat in the fixture reads the same as an intermittent feed: one reseat tells them apart.
      if (!run.value("retest", false)) {
        return {"Reseat the unit firmly and scan it again; if the trace jumps again, REJECT tray (intermittent feed).",
                "Check the test-port connector for dirt or wear if several units do this."};
      }
      return {"Put it in the REJECT tray: intermittent feed (the trace jumped again after a reseat).", ""};
    }
    if (cls == "no-response") {
      return {"Put it in the REJECT tray: no response (broken or shorted feed).", ""};
    }
    return {"Put it in the REJECT tray.", ""};
  }
  // aborted: not judged.
  if (aborted_by_instruments(run)) return {"Instrument trouble: unit not judged, test it again.", "If it happens again, call the test engineer."};
  return {"The test did not finish: unit not judged, test it again.", ""};
}

bool aborted_by_instruments(const json& run) {
  if (run.value("verdict", "aborted") != "aborted") return false;
  const std::string reason = run.value("reason", "");
  return reason.starts_with(core::kInstrumentTroublePrefix) || reason.find("instrument") != std::string::npos ||
         reason.find("timeout") != std::string::npos || reason.find("no reply") != std::string::npos;
}

std::string metrics_line(const json& run) {
  const json m = run.contains("metrics") ? run["metrics"] : json::object();
  std::string out;
  auto add = [&](std::string part) {
    if (!out.empty()) out += ", ";
    out += part;
  };
  if (auto f = number(m, "resonance_hz")) add(fmt::format("resonance {:.2f} MHz", *f / 1e6));
  if (auto d = number(m, "depth_db")) add(fmt::format("depth {:.1f} dB", *d));
  if (auto b = number(m, "bandwidth_hz")) add(fmt::format("bandwidth {:.1f} MHz", *b / 1e6));
  if (auto v = number(m, "vswr_at_resonance"); v && std::isfinite(*v) && *v > 0) add(fmt::format("VSWR {:.2f}", *v));
  if (auto mm = number(m, "min_margin_db")) add(fmt::format("smallest margin as read {:+.1f} dB", *mm));
  return out;
}

}  // namespace echoline::client
