#include "daemon/client/console.hpp"

#include "daemon/client/cli.hpp"

#include <chrono>
#include <thread>

#include <fmt/format.h>

#include "daemon/client/exit_codes.hpp"
#include "daemon/client/progress_bar.hpp"
#include "daemon/client/unit_advice.hpp"
#include "daemon/client/verdict_banner.hpp"
#include "daemon/core/offset_pair_check.hpp"
#include "daemon/store/serial.hpp"

namespace echoline::client {

using nlohmann::json;

namespace {

constexpr const char* kSafetyText =
    "  SAFETY\n"
    "  * The antenna under test RADIATES while it is measured. Keep the source power low (the\n"
    "    recipe sets it), test in a shielded enclosure where local rules require one, and\n"
    "    transmit only in bands you are allowed to use.\n"
    "  * The analyzer's input is protected by the recipe check: a recipe whose worst-case input\n"
    "    could exceed the analyzer's maximum safe input is refused. Never connect the generator\n"
    "    straight to the analyzer.\n";

std::string str(const json& j, const char* key, std::string fallback = "") {
  if (!j.is_object()) return fallback;
  auto it = j.find(key);
  if (it == j.end() || !it->is_string()) return fallback;
  return it->get<std::string>();
}

bool is_quit(const std::string& s) { return s == "q" || s == "quit" || s == "Q" || s == "QUIT"; }
bool is_yes(const std::string& s) { return s == "y" || s == "Y" || s == "yes" || s == "YES"; }
bool is_no(const std::string& s) { return s == "n" || s == "N" || s == "no" || s == "NO"; }

}  // namespace

double SessionSummary::yield() const {
  const auto y = store::summarize_yield(outcomes);
  return y.empty() ? 0.0 : y.front().final_yield;
}

int SessionSummary::units_judged() const {
  const auto y = store::summarize_yield(outcomes);
  return y.empty() ? 0 : y.front().units_tested;
}

Console::Console(ApiClient& api, LineInput& input, std::ostream& out, ConsoleOptions options, PlotSource plot)
    : api_(api), input_(input), out_(out), options_(std::move(options)), plot_(std::move(plot)) {
  if (!options_.sim_fixture.empty()) fixture_ = std::make_unique<FixtureControl>(options_.sim_fixture);
}

Console::Outcome Console::lost(const Error& e) {
  lost_error_ = e;
  return Outcome::lost;
}

bool Console::recover(const std::string& serial) {
  const bool tty = options_.output_is_tty;
  out_ << "\nLOST THE CONNECTION TO THE STATION SERVICE (echolined at " << api_.address() << "): " << lost_error_.message
       << "\nstation service not reachable — retrying after 1 s, 2 s, 4 s, then every 5 s";
  if (options_.reconnect_timeout.count() > 0) out_ << fmt::format(" for up to {} s", options_.reconnect_timeout.count());
  if (!serial.empty()) {
    out_ << fmt::format("; the unit in the fixture ({}) was NOT judged, test it again", serial);
  }
  out_ << "\n";
  if (!serial.empty()) {
    out_ << "  SAFETY: if the service stopped in the middle of a measurement, the generator's output may still\n"
            "  be ON and the antenna in the fixture may still radiate. If the service stays away, switch the\n"
            "  generator's RF output off at the instrument.\n";
  }
  out_ << std::flush;
  const ReconnectOutcome o = wait_for_daemon(api_, out_, {options_.reconnect_timeout, tty});
  if (!o.back) {
    out_ << fmt::format("\nstation service still not reachable after {} s ({} attempts) — giving up.\n", o.waited.count(),
                        o.attempts)
         << "The station cannot test until echolined runs again. Any unit in the fixture was NOT judged.\n"
         << std::flush;
    return false;
  }
  out_ << fmt::format("station service back ({}, after {} s)\n", api_.address(), o.waited.count()) << std::flush;
  return true;
}

int Console::run() {
  Outcome o = first_screen();
  while (o == Outcome::lost) {
    if (!recover("")) break;
    o = first_screen();
  }
  if (o == Outcome::done) o = scan_loop();
  print_summary();
  if (o == Outcome::lost) return kExitUnreachable;
  return untested_by_instruments_.empty() ? kExitOk : kExitInstrument;
}

void Console::not_tested_by_instruments(const std::string& serial) {
  untested_by_instruments_.insert(serial);
  out_ << "Unit not tested: " << serial << " (instrument trouble)\n" << std::flush;
}

Console::Outcome Console::first_screen() {
  auto st = api_.call("status", json::object());
  // An instrument last seen NOT READY is tried once more before the banner shows it.
  if (st && st->ok && probe_when_idle(api_, st->result)) st = api_.call("status", json::object());
  if (!st) return lost(st.error());
  if (!st->ok) {
    out_ << "The daemon refused status: " << st->message << "\n";
    return Outcome::done;
  }
  const json& s = st->result;
  const json& recipe = s.contains("recipe") ? s["recipe"] : json::object();
  const json& cal = s.contains("calibration") ? s["calibration"] : json::object();
  out_ << "==============================================================\n";
  out_ << " ECHOLINE STATION  " << str(s, "station", "?") << "\n";
  out_ << "==============================================================\n";
  out_ << fmt::format("  Recipe:      {} {} ({} points, {} acceptance)\n", str(recipe, "name", "?"),
                      str(recipe, "version"), recipe.value("points", 0), str(recipe, "decision_rule", "?"));
  if (s.contains("instruments")) {
    for (const auto& i : s["instruments"]) {
      const bool healthy = i.value("healthy", false);
      out_ << fmt::format("  {:<12} {} {} {}{}\n", str(i, "role") + ":", str(i, "name"), str(i, "address"),
                          healthy ? "ok" : "NOT READY",
                          healthy || str(i, "last_error").empty() ? "" : " - " + str(i, "last_error"));
    }
  }
  const bool due = cal.value("due", true);
  if (!cal.value("present", false)) {
    out_ << "  Calibration: none yet\n";
  } else {
    out_ << fmt::format("  Calibration: {} {} from {}, min directivity {:.1f} dB, {} units since\n",
                        cal.value("valid", false) ? "valid" : "NOT valid", str(cal, "id"), str(cal, "created_utc"),
                        cal.value("min_directivity_db", 0.0), cal.value("units_since", 0));
  }
  if (due) out_ << "               DUE: " << str(cal, "reason", "no calibration") << "\n";
  if (!options_.lot.empty()) out_ << "  Lot:         " << options_.lot << "\n";
  if (!options_.operator_name.empty()) out_ << "  Operator:    " << options_.operator_name << "\n";
  if (fixture_) out_ << "  Fixture:     SIMULATOR " << fixture_->address() << " (units connected automatically)\n";
  out_ << "--------------------------------------------------------------\n" << kSafetyText;
  out_ << "--------------------------------------------------------------\n" << std::flush;
  if (due) {
    auto ok = calibrate(false);
    if (!ok) return lost(ok.error());
  }
  return Outcome::done;
}

Console::Outcome Console::scan_loop() {
  for (;;) {
    std::string serial;
    bool again = false;
    if (requeued_) {
      serial = *requeued_;
      requeued_.reset();
      again = true;
      out_ << "\nScan serial: " << serial << "   (tested again: its test was interrupted)\n" << std::flush;
    } else {
      out_ << "\nScan serial: " << std::flush;
      auto line = input_.next();
      if (!line) {
        out_ << "\n";
        return Outcome::done;
      }
      if (!input_.interactive()) out_ << *line << "\n";
      if (line->empty()) continue;
      if (is_quit(*line)) return Outcome::done;
      if (is_yes(*line) || is_no(*line)) {
        out_ << "(\"" << *line << "\" answers no open question: ignored; scan a serial)\n" << std::flush;
        continue;
      }
      serial = *line;
    }
    if (test_unit(serial, again) == Outcome::done) continue;
    ++summary_.interrupted;
    summary_.interrupted_serials.push_back(serial);
    if (!recover(serial)) return Outcome::lost;
    if (again) {
      // Interrupted twice in a row: a unit that keeps the service from answering is not fed to it
      // a third time by itself.
      out_ << fmt::format("Unit {} was interrupted twice and is NOT judged: set it aside and call the test engineer.\n",
                          serial)
           << std::flush;
    } else if (input_.interactive()) {
      out_ << fmt::format("Unit {} was NOT judged: scan it again.\n", serial) << std::flush;
    } else {
      requeued_ = serial;
    }
  }
}

bool Console::confirm(const std::string& prompt) {
  out_ << prompt << " " << std::flush;
  if (input_.interactive()) {
    for (;;) {
      auto line = input_.next_typed();
      if (!line || is_quit(*line) || *line == "cancel") return false;
      if (line->empty()) return true;
      // Anything else is a serial scanned ahead: it is tested once this step is done.
      hold_scanned(*line);
      out_ << "Press Enter once it is connected (or q to cancel): " << std::flush;
    }
  }
  auto ahead = input_.peek();
  if (ahead && ahead->empty()) {
    input_.next();
    out_ << "(Enter)\n" << std::flush;
    return true;
  }
  if (fixture_) {
    out_ << "(simulator fixture)\n" << std::flush;
    return true;
  }
  out_ << "\nPiped input: expected an empty line to confirm; cancelled.\n" << std::flush;
  return false;
}

void Console::hold_scanned(const std::string& serial) {
  input_.hold(serial);
  out_ << fmt::format("\n(serial {} kept: it is tested next, {} waiting)\n", serial, input_.held()) << std::flush;
}

Result<json> Console::job_events(long id, const std::string& label) {
  std::unique_ptr<ProgressDisplay> progress;
  std::string progress_label;
  for (;;) {
    auto m = api_.next_message(options_.job_timeout);
    if (!m) {
      if (progress) progress->finish();
      return m.error();
    }
    const json& j = *m;
    if (!j.contains("id") || !j["id"].is_number_integer() || j["id"].get<long>() != id || !j.contains("event")) continue;
    const std::string event = str(j, "event");
    if (event == "progress") {
      const std::string standard = str(j, "standard");
      const std::string want = standard.empty() ? label : "measuring " + standard;
      if (!progress || want != progress_label) {
        if (progress) progress->finish();
        progress = std::make_unique<ProgressDisplay>(out_, options_.output_is_tty, want);
        progress_label = want;
      }
      progress->update(j.value("point", 0), j.value("of", 0));
    } else if (event == "prompt") {
      if (progress) progress->finish();
      progress.reset();
      const std::string standard = str(j, "standard");
      // A test's prompt is its second connection, the unit behind the offset line.
      const bool second = standard == core::kOffsetArm;
      bool connected = true;
      if (fixture_) {
        if (Status s = second ? fixture_->connect_unit_via_line(testing_serial_) : fixture_->connect_standard(standard); !s) {
          out_ << "Simulator fixture could not connect " << standard << ": " << s.error().message << "\n";
          connected = false;
        }
      }
      if (connected) {
        const std::string what = str(j, "description");
        if (second) {
          connected = confirm(fmt::format("\n>>> SECOND READING of {}: fit the offset line to the test port and the unit to "
                                          "its far end, then press Enter (take the line off again afterwards; q ends the run unjudged):",
                                          testing_serial_));
        } else {
          connected = confirm(what.empty()
                                  ? fmt::format("\n>>> Connect the {} standard to the test port, then press Enter:", standard)
                                  : fmt::format("\n>>> Connect {} ({}) to the test port, then press Enter:", standard, what));
        }
      }
      json args = {{"standard", standard}};
      if (!connected) args["connected"] = false;
      auto r = api_.call("cal.answer", args);
      if (!r) return r.error();
      if (!r->ok) out_ << "The daemon refused the answer: " << r->message << "\n";
    } else if (event == "result" || event == "error") {
      if (progress) progress->finish();
      return j;
    }
  }
}

Result<bool> Console::calibrate(bool check_only) {
  out_ << (check_only ? "\n--- CHECK STANDARD: re-measure one standard to confirm the calibration still holds ---\n"
                      : "\n--- CALIBRATION: connect each standard when asked ---\n")
       << std::flush;
  calibration_instrument_trouble_ = false;
  auto reply = api_.call(check_only ? "cal.check" : "cal.start", json::object());
  if (!reply) return reply.error();
  if (!reply->ok && reply->code == "shutting_down") {
    return make_error(ErrorKind::closed, fmt::format("the daemon is stopping: {}", reply->message));
  }
  if (!reply->ok) {
    out_ << (check_only ? "Check refused: " : "Calibration refused: ") << reply->message << "\n" << std::flush;
    return false;
  }
  const long id = api_.last_id();
  auto end = job_events(id, "measuring");
  if (!end) return end.error();
  const json& e = *end;
  if (str(e, "event") == "error") {
    const json err = e.contains("error") ? e["error"] : json::object();
    out_ << (check_only ? "CHECK NOT COMPLETED: " : "CALIBRATION NOT COMPLETED: ") << str(err, "message") << "\n";
    if (str(err, "code") == "instrument" || str(err, "code") == "unsafe") {
      calibration_instrument_trouble_ = true;
      out_ << "Instrument trouble: fix it, then scan a unit to try again.\n";
    }
    out_ << std::flush;
    return false;
  }
  if (check_only) {
    const json c = e.contains("check") ? e["check"] : json::object();
    const bool drifted = c.value("drifted", true);
    out_ << (drifted ? "Check standard DRIFTED: " : "Check standard ok: ") << str(c, "message") << "\n";
    if (drifted) out_ << "A new calibration is needed.\n";
    out_ << std::flush;
    return !drifted;
  }
  const json c = e.contains("calibration") ? e["calibration"] : json::object();
  const bool valid = c.value("valid", false);
  out_ << fmt::format("Calibration {}: {}, minimum directivity {:.1f} dB\n", str(c, "id"), valid ? "VALID" : "NOT VALID",
                      c.value("min_directivity_db", 0.0));
  if (c.contains("warnings")) {
    for (const auto& w : c["warnings"]) out_ << "  warning: " << (w.is_string() ? w.get<std::string>() : w.dump()) << "\n";
  }
  if (!valid) out_ << "Check the standards and their connections, then scan a unit to calibrate again.\n";
  out_ << std::flush;
  return valid;
}

Console::Outcome Console::test_unit(const std::string& serial, bool again) {
  if (!options_.serial_pattern.empty()) {
    if (Status s = store::validate_serial(serial, options_.serial_pattern); !s) {
      out_ << "\nNOT A VALID SERIAL: \"" << serial << "\"\n" << s.error().message << "\nScan the unit's barcode again.\n"
           << std::flush;
      return Outcome::done;
    }
  }
  int tested = 0;
  if (!again) {
    auto history = api_.call("runs.history", {{"serial", serial}});
    if (!history) return lost(history.error());
    if (history->ok && history->result.contains("runs")) tested = static_cast<int>(history->result["runs"].size());
  }
  if (tested > 0) {
    // Only y, n or Enter answer; a serial scanned meanwhile is kept for the scan loop and the
    // question stays open.
    std::optional<std::string> answer;
    for (;;) {
      out_ << fmt::format("{} already tested {} time{} — retest? [y/N] ", serial, tested, tested == 1 ? "" : "s") << std::flush;
      answer = input_.next_typed();
      if (answer && !input_.interactive()) out_ << *answer << "\n";
      if (!answer || answer->empty() || is_yes(*answer) || is_no(*answer) || is_quit(*answer)) break;
      hold_scanned(*answer);
    }
    if (!answer || !is_yes(*answer)) {
      out_ << "Not retested: " << serial << "\n" << std::flush;
      return Outcome::done;
    }
  }
  int busy_waits = 0;
  for (int attempt = 0; attempt < 3; ++attempt) {
    if (fixture_) {
      if (Status s = fixture_->connect_unit(serial); !s) {
        out_ << "Simulator fixture: " << s.error().message << "\nUnit not tested.\n" << std::flush;
        return Outcome::done;
      }
    } else if (attempt > 0) {
      if (!confirm(fmt::format("\n>>> Connect unit {} to the test port again, then press Enter:", serial))) {
        out_ << "Unit not tested: " << serial << "\n" << std::flush;
        return Outcome::done;
      }
    }
    json args = {{"serial", serial}};
    if (!options_.lot.empty()) args["lot"] = options_.lot;
    if (!options_.operator_name.empty()) args["operator"] = options_.operator_name;
    if (tested > 0) args["retest"] = true;
    auto reply = api_.call("test.start", args);
    if (!reply) return lost(reply.error());
    if (!reply->ok && reply->code == "shutting_down") {
      return lost(make_error(ErrorKind::closed, fmt::format("the daemon is stopping: {}", reply->message)));
    }
    if (!reply->ok) {
      // A daemon that has just restarted may still be connecting its instruments, or another
      // client's probe may be trying them: both end within the instruments' timeouts.
      if (reply->code == "busy" &&
          (reply->message.find("instrument connect") != std::string::npos ||
           reply->message.find("busy: probe ") != std::string::npos) &&
          wait_while_instruments_busy(api_, out_)) {
        --attempt;
        continue;
      }
      // The daemon may still be closing the previous job for a moment after its result event.
      if (reply->code == "busy" && busy_waits++ < 50) {
        std::this_thread::sleep_for(std::chrono::milliseconds(100));
        --attempt;
        continue;
      }
      if (reply->code == "calibration_due" || reply->code == "check_due") {
        out_ << "\n" << reply->message << "\n" << std::flush;
        auto ok = calibrate(reply->code == "check_due");
        if (!ok) return lost(ok.error());
        if (!*ok && reply->code == "calibration_due") {
          if (calibration_instrument_trouble_) not_tested_by_instruments(serial);
          else out_ << "Unit not tested: " << serial << " (no valid calibration)\n" << std::flush;
          return Outcome::done;
        }
        continue;
      }
      if (reply->code == "invalid_serial") {
        out_ << "\nNOT A VALID SERIAL: \"" << serial << "\"\n" << reply->message
             << "\nScan the unit's barcode again.\n" << std::flush;
      } else if (reply->code == "instrument" || reply->code == "unsafe") {
        out_ << "\nINSTRUMENT TROUBLE: " << reply->message << "\nUnit not judged. Call the test engineer.\n" << std::flush;
        not_tested_by_instruments(serial);
      } else if (reply->code == "busy") {
        out_ << "\nSTATION BUSY: " << reply->message << "\nWait for it to finish, then scan again.\n" << std::flush;
      } else {
        out_ << "\nThe daemon refused the test (" << reply->code << "): " << reply->message << "\n" << std::flush;
      }
      return Outcome::done;
    }
    const long id = api_.last_id();
    testing_serial_ = serial;
    auto end = job_events(id, "measuring " + serial);
    if (!end) return lost(end.error());
    const json& e = *end;
    if (str(e, "event") == "error" || !e.contains("run")) {
      const json err = e.contains("error") ? e["error"] : json::object();
      out_ << "\nTEST NOT COMPLETED: " << str(err, "message", "the station gave no result") << "\n" << std::flush;
      if (str(err, "code") == "instrument" || str(err, "code") == "unsafe") not_tested_by_instruments(serial);
      return Outcome::done;
    }
    show_run(e["run"]);
    // Judged now, or aborted: by the instruments it stays untested for the exit code.
    if (aborted_by_instruments(e["run"])) untested_by_instruments_.insert(serial);
    else untested_by_instruments_.erase(serial);
    // A daemon that is being stopped aborts the running test (API.md, Shutdown): the unit was not
    // judged, and the link is about to close.
    if (str(e["run"], "verdict") == "aborted" && str(e["run"], "reason").find("daemon stopping") != std::string::npos) {
      return lost(make_error(ErrorKind::closed, "the daemon is stopping (the test was aborted)"));
    }
    return Outcome::done;
  }
  out_ << "Unit not tested: " << serial << " (calibration kept being requested)\n" << std::flush;
  return Outcome::done;
}

void Console::show_run(const json& run) {
  const std::string verdict = str(run, "verdict", "aborted");
  const std::string serial = str(run, "serial");
  const bool before = inconclusive_count_[serial] > 0;
  if (verdict == "inconclusive") ++inconclusive_count_[serial];
  ++summary_.runs;
  ++summary_.runs_by_verdict[verdict];
  summary_.final_verdict[serial] = verdict;
  summary_.outcomes.push_back({"session", serial, verdict, str(run, "failure_class")});

  out_ << "\n" << verdict_banner(verdict, options_.colour);
  out_ << fmt::format("  Unit {}   verdict {}{}   run {}\n", serial, verdict,
                      str(run, "failure_class").empty() ? "" : " (" + str(run, "failure_class") + ")", str(run, "run_id"));
  const std::string reason = str(run, "reason");
  if (!reason.empty()) out_ << "  Why: " << reason << "\n";
  const std::string metrics = verdict == "aborted" ? "" : metrics_line(run);
  if (!metrics.empty()) out_ << "  Measured: " << metrics << "\n";
  if (run.contains("trim") && run["trim"].is_object()) out_ << "  Trim: " << str(run["trim"], "text") << "\n";
  const UnitAdvice advice = advise(run, before);
  out_ << "\n  >>> " << advice.action << "\n";
  if (!advice.detail.empty()) out_ << "      " << advice.detail << "\n";
  if (run.contains("stored") && !run.value("stored", true)) {
    out_ << "\n  WARNING: this run was NOT stored: " << str(run, "store_error") << "\n"
         << "  Set the unit aside and call the test engineer.\n";
  }
  if (verdict != "aborted") show_plot(str(run, "run_id"));
  out_ << std::flush;
}

void Console::show_plot(const std::string& run_id) {
  if (!plot_.points) return;
  auto points = plot_.points(run_id);
  if (!points) {
    if (!plot_warned_) out_ << "  (no plot: " << points.error().message << ")\n";
    plot_warned_ = true;
    return;
  }
  out_ << "\n" << return_loss_plot(*points, plot_.limits);
}

void Console::print_summary() {
  if (summary_.runs == 0 && untested_by_instruments_.empty() && input_.interactive()) return;
  const auto count = [&](const char* v) {
    auto it = summary_.runs_by_verdict.find(v);
    return it == summary_.runs_by_verdict.end() ? 0 : it->second;
  };
  out_ << "\n==============================================================\n";
  out_ << " SESSION SUMMARY\n";
  const auto joined = [](const auto& serials) {
    std::string text;
    for (const auto& s : serials) text += (text.empty() ? "" : ", ") + s;
    return text;
  };
  out_ << fmt::format("  Units tested: {}   runs: {}\n", summary_.final_verdict.size(), summary_.runs);
  out_ << fmt::format("  pass {}   fail {}   inconclusive {}   aborted {}   (runs)\n", count("pass"), count("fail"),
                      count("inconclusive"), count("aborted"));
  if (summary_.units_judged() > 0) {
    out_ << fmt::format("  Yield: {:.1f} % (units whose latest judged run passed, of {} judged)\n", 100 * summary_.yield(),
                        summary_.units_judged());
  } else {
    out_ << "  Yield: none (no unit judged)\n";
  }
  if (summary_.interrupted > 0) {
    out_ << fmt::format("  Tests interrupted by a lost station service: {} ({})\n", summary_.interrupted,
                        joined(summary_.interrupted_serials));
  }
  if (!untested_by_instruments_.empty()) {
    // Their runs are counted above as aborted: measured, never judged.
    out_ << fmt::format("  NOT JUDGED because of instrument trouble: {} unit{} ({})\n", untested_by_instruments_.size(),
                        untested_by_instruments_.size() == 1 ? "" : "s", joined(untested_by_instruments_));
  }
  out_ << "==============================================================\n";
  out_ << fmt::format("summary units={} runs={} pass={} fail={} inconclusive={} aborted={} yield={:.1f}%\n",
                      summary_.final_verdict.size(), summary_.runs, count("pass"), count("fail"), count("inconclusive"),
                      count("aborted"), 100 * summary_.yield())
       << std::flush;
}

}  // namespace echoline::client
