// API calls: roles, the one-job rule, jobs on the worker thread, events to the requester.
#include "daemon/service/api_handler.hpp"

#include <chrono>
#include <optional>
#include <set>
#include <variant>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/core/offset_pair_check.hpp"
#include "daemon/store/documents.hpp"
#include "daemon/store/export.hpp"
#include "daemon/service/clock.hpp"
#include "daemon/service/lot_summary.hpp"
#include "drivers/config_error.hpp"
#include "echoline/version.hpp"

namespace echoline::service {
namespace {

using nlohmann::json;

const std::set<std::string>& engineer_calls() {
  static const std::set<std::string> calls = {"recipe.select", "report.lot", "export"};
  return calls;
}

std::string code_for(ErrorKind kind) {
  switch (kind) {
    case ErrorKind::storage: return "storage";
    case ErrorKind::config: return "config";
    case ErrorKind::unsafe: return "unsafe";
    case ErrorKind::cancelled: return "cancelled";
    case ErrorKind::invalid_argument: return "bad_request";
    case ErrorKind::io: return "storage";
    case ErrorKind::internal: return "internal";
    default: return "instrument";
  }
}

// Progress events at most every kProgressInterval, plus the first and the last point: a client
// needs a live bar, not one event per point (201 events per 50 ms sweep cost the sweep ~10 %).
constexpr auto kProgressInterval = std::chrono::milliseconds(40);
class ProgressGate {
 public:
  bool due(int point, int of) {
    const auto now = std::chrono::steady_clock::now();
    if (point > 1 && point < of && now - last_ < kProgressInterval) return false;
    last_ = now;
    return true;
  }

 private:
  std::chrono::steady_clock::time_point last_{};
};

}  // namespace

bool constant_time_equal(std::string_view a, std::string_view b) {
  const std::size_t n = std::max(a.size(), b.size());
  unsigned diff = a.size() == b.size() ? 0u : 1u;
  for (std::size_t i = 0; i < n; ++i) {
    const unsigned char x = i < a.size() ? static_cast<unsigned char>(a[i]) : 0;
    const unsigned char y = i < b.size() ? static_cast<unsigned char>(b[i]) : 0;
    diff |= static_cast<unsigned>(x ^ y);
  }
  return diff == 0;
}

// Sends the prompt event and waits for cal.answer (or cancellation, or the requester leaving, or
// the daemon stopping): a calibration's standards, and a test's second connection through the
// offset line where no switch arm makes it.
class ApiHandler::ConnectPrompter : public Prompter {
 public:
  ConnectPrompter(ApiHandler& h, std::shared_ptr<ClientLink> link, json id) : h_(h), link_(std::move(link)), id_(std::move(id)) {}
  bool wait_connected(const std::string& standard) override {
    std::unique_lock lock(h_.mu_);
    if (h_.stopping_) {
      h_.cancel_.cancel("daemon stopping");
      return false;
    }
    h_.awaiting_standard_ = standard;
    h_.answered_ = false;
    h_.busy_info_["standard"] = standard;
    h_.busy_info_["waiting"] = true;
    const std::string description = h_.station_.standard_description(standard);
    std::string message;
    if (standard == core::kOffsetArm) {
      message = fmt::format("second reading, {}: {}, then answer", standard, description);
    } else if (description.empty()) {
      message = fmt::format("connect the {} standard to the test port, then answer", standard);
    } else {
      message = fmt::format("connect the {} standard ({}) to the test port, then answer", standard, description);
    }
    json prompt = {{"standard", standard}, {"message", message}};
    if (!description.empty()) prompt["description"] = description;
    if (h_.busy_info_.contains("serial")) prompt["serial"] = h_.busy_info_["serial"];   // a test's unit
    link_->send(event_line(id_, "prompt", prompt));
    prompt["event"] = "prompt";
    prompt["job"] = h_.busy_info_.value("kind", "calibration");
    h_.tap(std::move(prompt));
    while (!h_.answered_ && !h_.cancel_.cancelled()) {
      if (!link_->alive()) {
        lock.unlock();
        h_.cancel_.cancel("cancelled: the client that started it disconnected");
        lock.lock();
        break;
      }
      h_.cv_.wait_for(lock, std::chrono::milliseconds(200));
    }
    h_.awaiting_standard_.clear();
    h_.busy_info_["waiting"] = false;
    return h_.answered_ && !h_.cancel_.cancelled();
  }

 private:
  ApiHandler& h_;
  std::shared_ptr<ClientLink> link_;
  json id_;
};

ApiHandler::ApiHandler(Station& station, std::string token) : station_(station), token_(std::move(token)) {}

ApiHandler::~ApiHandler() { stop("daemon stopping"); }

void ApiHandler::stop(const std::string& reason) {
  {
    std::lock_guard lock(mu_);
    stopping_ = true;
    if (busy_) cancel_.cancel(reason);
  }
  cv_.notify_all();
  if (worker_.joinable()) worker_.join();
}

void ApiHandler::finish_and_stop() {
  {
    std::lock_guard lock(mu_);
    stopping_ = true;
    // A test waiting for the operator's second connection would wait for nobody: cancelled too.
    if (busy_ && (busy_info_.value("kind", "") != "test" || !awaiting_standard_.empty())) cancel_.cancel("daemon stopping");
  }
  cv_.notify_all();
  if (worker_.joinable()) worker_.join();
}

void ApiHandler::run_busy(const std::string& kind, const std::function<void()>& work) {
  {
    std::lock_guard lock(mu_);
    busy_ = true;
    busy_info_ = {{"kind", kind}};
  }
  struct Idle {
    ApiHandler& h;
    ~Idle() {
      std::lock_guard lock(h.mu_);
      h.busy_ = false;
      h.busy_info_ = nullptr;
    }
  } idle{*this};
  work();
}

void ApiHandler::reply(const std::shared_ptr<ClientLink>& link, const json& id, json result) {
  link->send(reply_ok(id, std::move(result)));
}

void ApiHandler::fail(const std::shared_ptr<ClientLink>& link, const json& id, std::string_view code,
                      std::string_view message) {
  link->send(reply_error(id, code, message));
}

std::optional<std::string> ApiHandler::busy_text() const {
  std::lock_guard lock(mu_);
  if (!busy_) return std::nullopt;
  if (busy_info_.value("kind", "") == "test") return fmt::format("test of {}", busy_info_.value("serial", "?"));
  return std::string(busy_info_.value("kind", "job"));
}

json ApiHandler::busy_json() const {
  std::lock_guard lock(mu_);
  return busy_ ? busy_info_ : json(nullptr);
}

bool ApiHandler::start_job(std::string kind, json busy, std::shared_ptr<ClientLink> link, std::string accepted,
                           std::function<std::string()> job) {
  std::lock_guard lock(mu_);
  if (busy_ || stopping_) return false;
  if (worker_.joinable()) worker_.join();   // the previous job has finished (busy_ is false)
  busy_ = true;
  busy_info_ = std::move(busy);
  busy_info_["kind"] = kind;
  cancel_.reset();
  link->send(std::move(accepted));
  json started = busy_info_;
  started["event"] = "started";
  started["job"] = kind;
  tap(std::move(started));
  worker_ = std::thread([this, kind, link = std::move(link), job = std::move(job)] {
    std::string final_event = job();
    {
      std::lock_guard l(mu_);
      busy_ = false;
      busy_info_ = nullptr;
    }
    if (tap_) {
      // The watchers get the same final event, without the request's id.
      json ev = json::parse(final_event, nullptr, /*allow_exceptions=*/false);
      if (ev.is_object()) {
        ev.erase("id");
        ev.erase("v");
        ev["job"] = kind;
        tap(std::move(ev));
      }
    }
    link->send(std::move(final_event));
  });
  return true;
}

void ApiHandler::tap(json event) const {
  if (!tap_) return;
  try {
    tap_(event);
  } catch (const std::exception& e) {
    spdlog::warn("event watcher: {}", e.what());
  }
}

void ApiHandler::set_progress(int point, int of, const std::string& standard) {
  std::lock_guard lock(mu_);
  busy_info_["point"] = point;
  busy_info_["of"] = of;
  if (!standard.empty()) busy_info_["standard"] = standard;
}

bool ApiHandler::handle_line(const std::shared_ptr<ClientLink>& link, ConnectionState& state, std::string_view line) {
  auto parsed = parse_request(line);
  if (auto* err = std::get_if<RequestError>(&parsed)) {
    fail(link, err->id, err->code, err->message);
    return err->code != "too_large";
  }
  const Request& req = std::get<Request>(parsed);
  try {
    dispatch(link, state, req);
  } catch (const std::exception& e) {
    // Edge: anything thrown by a library call becomes an error reply; the daemon keeps going.
    spdlog::error("{}: {}", req.call, e.what());
    fail(link, req.id, "internal", fmt::format("{}: {}", req.call, e.what()));
  }
  return true;
}

void ApiHandler::dispatch(const std::shared_ptr<ClientLink>& link, ConnectionState& state, const Request& req) {
  const std::string& call = req.call;
  if (call == "hello") return call_hello(link, state, req);
  if (state.role == Role::none) {
    return fail(link, req.id, "unauthorized", fmt::format("{}: send hello with the station token first", call));
  }
  if (engineer_calls().count(call) && state.role != Role::engineer) {
    return fail(link, req.id, "forbidden", fmt::format("{}: needs the engineer role (hello with role engineer)", call));
  }
  if (call == "status") {
    json s = station_.status_json();
    s["commit"] = std::string(commit());
    s["busy"] = busy_json();
    return reply(link, req.id, std::move(s));
  }
  if (call == "cal.status") return reply(link, req.id, station_.calibration_json());
  if (call == "test.start") return call_test_start(link, req);
  if (call == "cal.start") return call_cal_start(link, req, false);
  if (call == "cal.check") return call_cal_start(link, req, true);
  if (call == "cal.answer") return call_cal_answer(link, req);
  if (call == "cancel") return call_cancel(link, req);
  if (call == "instruments.probe") return call_probe(link, req);
  if (call == "runs.history" || call == "runs.lot") return call_runs(link, req);
  if (call == "report.lot") return call_report_lot(link, req);
  if (call == "export") return call_export(link, req);
  if (call == "run.get") return call_run_get(link, req);
  if (call == "recipe.select") return call_recipe_select(link, req);
  if (call == "lot.summary") return call_lot_summary(link, req);
  fail(link, req.id, "unknown_call", fmt::format("request: unknown call \"{}\"", call));
}

void ApiHandler::call_hello(const std::shared_ptr<ClientLink>& link, ConnectionState& state, const Request& req) {
  const std::string role = req.args.value("role", "operator");
  if (role != "operator" && role != "engineer") {
    return fail(link, req.id, "bad_request", fmt::format("hello: role must be operator or engineer, not \"{}\"", role));
  }
  const bool needs_token = !token_.empty() && (role == "engineer" || !state.loopback);
  if (needs_token) {
    const std::string given = req.args.value("token", "");
    if (given.empty() || !constant_time_equal(given, token_)) {
      return fail(link, req.id, "unauthorized", fmt::format("hello: role {} needs the station token; the token given is {}",
                                                            role, given.empty() ? "missing" : "wrong"));
    }
  }
  state.role = role == "engineer" ? Role::engineer : Role::operator_;
  reply(link, req.id,
        {{"api", kApiVersion}, {"daemon", version_line("echolined")}, {"station", station_.config().station}, {"role", role}});
}

void ApiHandler::call_test_start(const std::shared_ptr<ClientLink>& link, const Request& req) {
  TestRequest t;
  t.serial = req.args["serial"].get<std::string>();
  t.lot = req.args.value("lot", "");
  t.operator_name = req.args.value("operator", "");
  t.retest = req.args.value("retest", false);
  if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
  if (auto refusal = station_.precheck_test(t)) return fail(link, req.id, refusal->code, refusal->message);
  const int points = station_.plan_points();
  json id = req.id;
  bool started = start_job("test", {{"serial", t.serial}, {"point", 0}, {"of", points}}, link,
                           reply_ok(req.id, {{"serial", t.serial}, {"points", points}}), [this, link, id, t] {
    ProgressGate gate;
    ConnectPrompter prompter(*this, link, id);
    TestOutcome out = station_.run_test(t, cancel_, [&](int i, int n) {
      set_progress(i, n, "");
      if (gate.due(i, n)) {
        link->send(event_line(id, "progress", {{"point", i}, {"of", n}}));
        tap({{"event", "progress"}, {"job", "test"}, {"serial", t.serial}, {"point", i}, {"of", n}});
      }
    }, &prompter);
    json run = run_json(out.run);
    run["stored"] = static_cast<bool>(out.stored);
    if (!out.stored) run["store_error"] = out.stored.error().message;
    return event_line(id, "result", {{"run", run}});
  });
  if (!started) {
    if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
    return fail(link, req.id, "shutting_down", "test.start: the daemon is stopping");
  }
}

void ApiHandler::call_cal_start(const std::shared_ptr<ClientLink>& link, const Request& req, bool check_only) {
  if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
  auto standards = station_.standards();
  if (check_only) {
    json cal = station_.calibration_json();
    if (!cal["present"].get<bool>()) return fail(link, req.id, "calibration_due", "no calibration to check yet: calibrate the station first");
    standards = {cal["check"]["standard"].get<std::string>()};
  }
  const int points = station_.plan_points();
  json id = req.id;
  const std::string kind = check_only ? "check" : "calibration";
  bool started = start_job(kind, {{"standard", standards.front()}, {"waiting", false}}, link,
                           reply_ok(req.id, {{"standards", standards}, {"points", points}}), [this, link, id, check_only] {
    ConnectPrompter prompter(*this, link, id);
    ProgressGate gate;
    auto progress = [&](const std::string& standard, int i, int n) {
      set_progress(i, n, standard);
      if (gate.due(i, n)) {
        link->send(event_line(id, "progress", {{"standard", standard}, {"point", i}, {"of", n}}));
        tap({{"event", "progress"}, {"job", check_only ? "check" : "calibration"}, {"standard", standard}, {"point", i}, {"of", n}});
      }
    };
    if (check_only) {
      CheckOutcome out = station_.run_check(prompter, cancel_, progress);
      if (out.error) {
        return event_line(id, "error", {{"error", {{"code", code_for(out.error->kind)}, {"message", out.error->message}}}});
      }
      return event_line(id, "result", {{"check", {{"drifted", out.drifted}, {"message", out.message}}}});
    }
    CalibrationOutcome out = station_.run_calibration(prompter, cancel_, progress);
    if (out.error) {
      return event_line(id, "error", {{"error", {{"code", code_for(out.error->kind)}, {"message", out.error->message}}}});
    }
    return event_line(id, "result", {{"calibration", calibration_summary_json(*out.record)}});
  });
  if (!started) {
    if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
    return fail(link, req.id, "shutting_down", "the daemon is stopping");
  }
}

void ApiHandler::call_cal_answer(const std::shared_ptr<ClientLink>& link, const Request& req) {
  const std::string standard = req.args["standard"].get<std::string>();
  const bool connected = req.args.value("connected", true);
  {
    std::lock_guard lock(mu_);
    if (awaiting_standard_.empty()) {
      return fail(link, req.id, "idle", "cal.answer: nothing is waiting for a connection (no standard, no second reading)");
    }
    if (standard != awaiting_standard_) {
      return fail(link, req.id, "wrong_standard",
                  fmt::format("cal.answer: waiting for {}, not {}", awaiting_standard_, standard));
    }
    if (connected) {
      answered_ = true;
    } else {
      cancel_.cancel(fmt::format("cancelled: {} not connected", standard));
    }
  }
  cv_.notify_all();
  reply(link, req.id, {{"standard", standard}, {"measuring", connected}});
}

// A job of its own, so it never talks to an instrument beside a test or a calibration.
void ApiHandler::call_probe(const std::shared_ptr<ClientLink>& link, const Request& req) {
  if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
  json id = req.id;
  bool started = start_job("probe", json::object(), link, reply_ok(req.id, json::object()), [this, id] {
    station_.probe_instruments();
    return event_line(id, "result", {{"instruments", station_.status_json()["instruments"]}});
  });
  if (!started) {
    if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
    return fail(link, req.id, "shutting_down", "instruments.probe: the daemon is stopping");
  }
}

void ApiHandler::call_cancel(const std::shared_ptr<ClientLink>& link, const Request& req) {
  auto busy = busy_text();
  if (!busy) return fail(link, req.id, "idle", "cancel: nothing is running");
  if (*busy == "instrument connect") {
    return fail(link, req.id, "busy", "cancel: the instrument connect at start-up cannot be cancelled; it ends within the "
                                      "instruments' timeouts");
  }
  cancel_.cancel("cancelled by request");
  cv_.notify_all();
  reply(link, req.id, {{"cancelled", *busy}});
}

void ApiHandler::call_runs(const std::shared_ptr<ClientLink>& link, const Request& req) {
  const bool by_serial = req.call == "runs.history";
  const std::string key = req.args[by_serial ? "serial" : "lot"].get<std::string>();
  auto runs = by_serial ? station_.store().history(key) : station_.store().lot_runs(key, false);
  if (!runs) return fail(link, req.id, "storage", runs.error().message);
  json list = json::array();
  for (const auto& r : *runs) list.push_back(run_json(r));
  reply(link, req.id, {{by_serial ? "serial" : "lot", key}, {"runs", list}});
}

// The daemon writes no file for a client: documents travel back in the reply and the client
// writes them. A request that still names a path is refused, so nothing is written by mistake.
namespace {
std::optional<std::string> refuse_path(const Request& req) {
  if (!req.args.contains("path")) return std::nullopt;
  return fmt::format("{}: the daemon writes no file; drop \"path\": the {} comes back in the reply's \"content\" "
                     "and the client writes it",
                     req.call, req.call == "report.lot" ? "report" : "export");
}

json document_json(store::Document doc) {
  return {{"runs", doc.runs}, {"media_type", std::move(doc.media_type)}, {"bytes", doc.content.size()},
          {"content", std::move(doc.content)}};
}
}  // namespace

void ApiHandler::call_report_lot(const std::shared_ptr<ClientLink>& link, const Request& req) {
  if (auto refused = refuse_path(req)) return fail(link, req.id, "bad_request", *refused);
  const std::string lot = req.args["lot"].get<std::string>();
  // Limits come from the recipe stored with the lot's runs; the loaded recipe stands in only for runs
  // whose recipe text is not stored (and the report says so).
  const auto recipe = station_.recipe();
  const store::LocalRecipe loaded{recipe->name, recipe->version, recipe->content_hash,
                                  "the station's loaded recipe " + recipe->source_path, recipe->limits};
  auto doc = store::lot_report_document(station_.store(), lot, loaded, utc_iso8601(unix_now_s()));
  if (!doc) return fail(link, req.id, "storage", doc.error().message);
  if (doc->runs == 0) return fail(link, req.id, "not_found", fmt::format("report.lot: no runs stored for lot \"{}\"", lot));
  json result = document_json(std::move(doc.value()));
  result["lot"] = lot;
  reply(link, req.id, std::move(result));
}

void ApiHandler::call_export(const std::shared_ptr<ClientLink>& link, const Request& req) {
  if (auto refused = refuse_path(req)) return fail(link, req.id, "bad_request", *refused);
  const std::string scope = req.args["scope"].get<std::string>();
  const std::string key = req.args["key"].get<std::string>();
  const std::string format = req.args["format"].get<std::string>();
  auto doc = store::export_document(station_.store(), scope, key, format);
  if (!doc) return fail(link, req.id, code_for(doc.error().kind), doc.error().message);
  if (doc->runs == 0) return fail(link, req.id, "not_found", fmt::format("export: no runs stored for {} \"{}\"", scope, key));
  json result = document_json(std::move(doc.value()));
  result["scope"] = scope;
  result["key"] = key;
  result["format"] = format;
  reply(link, req.id, std::move(result));
}

void ApiHandler::call_run_get(const std::shared_ptr<ClientLink>& link, const Request& req) {
  const std::string run_id = req.args["run_id"].get<std::string>();
  auto run = station_.store().load_run(run_id);
  if (!run) {
    if (run.error().kind == ErrorKind::invalid_argument) {
      return fail(link, req.id, "not_found", fmt::format("run.get: no run \"{}\" is stored", run_id));
    }
    return fail(link, req.id, "storage", run.error().message);
  }
  reply(link, req.id, {{"run", store::run_to_json(*run, /*with_points=*/true)}});
}

void ApiHandler::call_recipe_select(const std::shared_ptr<ClientLink>& link, const Request& req) {
  if (auto busy = busy_text()) return fail(link, req.id, "busy", fmt::format("busy: {} is running", *busy));
  const std::string path = req.args["path"].get<std::string>();
  try {
    auto r = station_.select_recipe(path);
    if (!r) return fail(link, req.id, "config", r.error().message);
    reply(link, req.id, std::move(r.value()));
  } catch (const drivers::ConfigError& e) {
    fail(link, req.id, "config", e.what());
  }
}

void ApiHandler::call_lot_summary(const std::shared_ptr<ClientLink>& link, const Request& req) {
  auto summary = lot_summary(station_.store(), req.args.value("lot", ""), station_.recipe()->limits);
  if (!summary) return fail(link, req.id, "storage", summary.error().message);
  reply(link, req.id, std::move(summary.value()));
}

}  // namespace echoline::service
