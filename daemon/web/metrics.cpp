// OpenMetrics text for /metrics, and the cycle-time histogram behind it.
#include "daemon/web/metrics.hpp"

#include <cmath>

#include <fmt/format.h>

#include "daemon/service/clock.hpp"

namespace echoline::web {
namespace {

using nlohmann::json;

// Numbers as OpenMetrics writes them: integers plainly, others with enough digits; never "inf".
std::string num(double v) {
  if (std::isnan(v)) return "NaN";
  if (std::isinf(v)) return v > 0 ? "+Inf" : "-Inf";
  return fmt::format("{}", v);
}

// A bucket bound in the canonical form OpenMetrics asks for ("1.0", "0.25").
std::string le(double v) {
  std::string s = fmt::format("{}", v);
  if (s.find_first_of(".e") == std::string::npos) s += ".0";
  return s;
}

void family(std::string& out, const char* name, const char* type, const char* help, const char* unit = nullptr) {
  out += fmt::format("# TYPE {} {}\n", name, type);
  if (unit) out += fmt::format("# UNIT {} {}\n", name, unit);
  out += fmt::format("# HELP {} {}\n", name, help);
}

}  // namespace

std::string escape_label(const std::string& value) {
  std::string out;
  for (char c : value) {
    if (c == '\\') out += "\\\\";
    else if (c == '"') out += "\\\"";
    else if (c == '\n') out += "\\n";
    else out += c;
  }
  return out;
}

CycleHistogram::CycleHistogram(double created_unix_s) { s_.created_unix_s = created_unix_s; }

void CycleHistogram::observe(double seconds) {
  if (!std::isfinite(seconds) || seconds < 0) return;
  std::lock_guard lock(mu_);
  std::size_t b = 0;
  while (b < kCycleBuckets.size() && seconds > kCycleBuckets[b]) ++b;
  ++s_.counts[b];
  ++s_.count;
  s_.sum_s += seconds;
}

CycleSnapshot CycleHistogram::snapshot() const {
  std::lock_guard lock(mu_);
  return s_;
}

Result<store::YieldSummary> station_yield(store::RunStore& store, const std::string& station) {
  return store.live_yield(store::YieldGroup::station, station);
}

std::string render_openmetrics(const MetricsInput& in) {
  std::string o;
  const std::string st = escape_label(in.station);

  family(o, "echoline_runs", "counter", "Runs stored by this station, by verdict (retests and aborted runs included).");
  for (const char* v : {"pass", "fail", "inconclusive", "aborted"}) {
    auto it = in.yield.runs_by_verdict.find(v);
    o += fmt::format("echoline_runs_total{{station=\"{}\",verdict=\"{}\"}} {}\n", st, v,
                     it == in.yield.runs_by_verdict.end() ? 0 : it->second);
  }
  family(o, "echoline_failed_runs", "counter", "Failed and inconclusive runs by failure class.");
  for (const char* c : {"no-response", "tuned-low", "tuned-high", "shallow", "out-of-mask"}) {
    auto it = in.yield.runs_by_class.find(c);
    o += fmt::format("echoline_failed_runs_total{{station=\"{}\",failure_class=\"{}\"}} {}\n", st, c,
                     it == in.yield.runs_by_class.end() ? 0 : it->second);
  }
  family(o, "echoline_units_tested", "gauge", "Distinct serials with at least one finished run.");
  o += fmt::format("echoline_units_tested{{station=\"{}\"}} {}\n", st, in.yield.units_tested);
  family(o, "echoline_units_final_pass", "gauge", "Units whose latest finished run passed.");
  o += fmt::format("echoline_units_final_pass{{station=\"{}\"}} {}\n", st, in.yield.units_final_pass);
  family(o, "echoline_units_first_pass", "gauge", "Units whose first finished run passed.");
  o += fmt::format("echoline_units_first_pass{{station=\"{}\"}} {}\n", st, in.yield.units_first_pass);

  family(o, "echoline_cycle_seconds", "histogram", "Time from a test's start to its verdict, tests since the daemon started.",
         "seconds");
  std::uint64_t cumulative = 0;
  for (std::size_t b = 0; b < kCycleBuckets.size(); ++b) {
    cumulative += in.cycles.counts[b];
    o += fmt::format("echoline_cycle_seconds_bucket{{station=\"{}\",le=\"{}\"}} {}\n", st, le(kCycleBuckets[b]), cumulative);
  }
  cumulative += in.cycles.counts.back();
  o += fmt::format("echoline_cycle_seconds_bucket{{station=\"{}\",le=\"+Inf\"}} {}\n", st, cumulative);
  o += fmt::format("echoline_cycle_seconds_count{{station=\"{}\"}} {}\n", st, in.cycles.count);
  o += fmt::format("echoline_cycle_seconds_sum{{station=\"{}\"}} {}\n", st, num(in.cycles.sum_s));
  o += fmt::format("echoline_cycle_seconds_created{{station=\"{}\"}} {}\n", st, num(in.cycles.created_unix_s));

  // A status that could not be had (null) shows as no calibration and no instruments.
  const json status = in.status.is_object() ? in.status : json::object();
  const json cal = status.value("calibration", json::object());
  const bool present = cal.value("present", false);
  family(o, "echoline_calibration_present", "gauge", "1 when the station holds a calibration.");
  o += fmt::format("echoline_calibration_present{{station=\"{}\"}} {}\n", st, present ? 1 : 0);
  family(o, "echoline_calibration_due", "gauge", "1 when a calibration (or the check standard) is due before the next test.");
  const bool due = cal.value("due", true) || cal.value("check", json::object()).value("due", false);
  o += fmt::format("echoline_calibration_due{{station=\"{}\"}} {}\n", st, due ? 1 : 0);
  if (present) {
    const auto created = service::parse_utc_iso8601(cal.value("created_utc", ""));
    if (created) {
      family(o, "echoline_calibration_age_seconds", "gauge", "Age of the calibration in use.", "seconds");
      o += fmt::format("echoline_calibration_age_seconds{{station=\"{}\"}} {}\n", st, num(in.now_unix_s - *created));
    }
    family(o, "echoline_calibration_units", "gauge", "Units tested since the calibration.");
    o += fmt::format("echoline_calibration_units{{station=\"{}\"}} {}\n", st, cal.value("units_since", 0));
  }

  const json instruments = status.value("instruments", json::array());
  family(o, "echoline_instrument_errors", "counter", "Errors reported against each instrument since the daemon started.");
  for (const auto& i : instruments) {
    o += fmt::format("echoline_instrument_errors_total{{station=\"{}\",role=\"{}\",name=\"{}\"}} {}\n", st,
                     escape_label(i.value("role", "")), escape_label(i.value("name", "")), i.value("errors", 0));
  }
  family(o, "echoline_instrument_reconnects", "counter", "Reconnections to each instrument since the daemon started.");
  for (const auto& i : instruments) {
    o += fmt::format("echoline_instrument_reconnects_total{{station=\"{}\",role=\"{}\",name=\"{}\"}} {}\n", st,
                     escape_label(i.value("role", "")), escape_label(i.value("name", "")), i.value("reconnects", 0));
  }
  family(o, "echoline_instrument_up", "gauge", "1 when the instrument answered and was identified.");
  for (const auto& i : instruments) {
    o += fmt::format("echoline_instrument_up{{station=\"{}\",role=\"{}\",name=\"{}\"}} {}\n", st,
                     escape_label(i.value("role", "")), escape_label(i.value("name", "")), i.value("healthy", false) ? 1 : 0);
  }
  const json fwd = status.value("forwarding", json::object());
  if (fwd.contains("outbox_depth")) {
    family(o, "echoline_outbox_depth", "gauge", "Stored runs waiting to be forwarded to the central database (0 without one: runs are not queued).");
    o += fmt::format("echoline_outbox_depth{{station=\"{}\"}} {}\n", st, fwd.value("outbox_depth", 0));
    family(o, "echoline_outbox_refused", "gauge", "Runs the central database refused (kept, not retried).");
    o += fmt::format("echoline_outbox_refused{{station=\"{}\"}} {}\n", st, fwd.value("outbox_refused", 0));
  }
  family(o, "echoline_busy", "gauge", "1 while a test, calibration or check runs (the source's RF may be on).");
  o += fmt::format("echoline_busy{{station=\"{}\"}} {}\n", st, status.contains("busy") && !status["busy"].is_null() ? 1 : 0);
  o += "# EOF\n";
  return o;
}

}  // namespace echoline::web
