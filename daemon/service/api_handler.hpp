// The meaning of API requests (API.md): roles, the one-job-at-a-time rule, the worker thread
// that runs tests and calibrations, events back to the requesting connection. No sockets here.
// Threading: handle_line() is called from the server's one io thread; jobs run on one worker
// thread; ClientLink::send must be thread-safe. stop() may be called from any thread but the worker.
#pragma once

#include <atomic>
#include <condition_variable>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <string_view>
#include <functional>
#include <thread>

#include <nlohmann/json.hpp>

#include "daemon/service/api_protocol.hpp"
#include "daemon/service/station.hpp"

namespace echoline::service {

// One client connection as the handler sees it.
class ClientLink {
 public:
  virtual ~ClientLink() = default;
  virtual void send(std::string line) = 0;   // thread-safe; dropped once the connection closed
  virtual bool alive() const = 0;            // false once the peer has gone
};

enum class Role { none, operator_, engineer };

// Per-connection state kept by the server and passed back with every line.
struct ConnectionState {
  Role role = Role::operator_;   // non-loopback TCP starts at Role::none
  bool loopback = true;
};

// Watches every job the station runs, whoever started it (the pages and /metrics): one JSON
// object per event, {"event":"started"|"progress"|"prompt"|"result"|"error","job":"test"|
// "calibration"|"check",...} with the fields of the API event (API.md). Called on the worker
// thread and on the thread that starts a job; must return quickly and never throw.
using EventTap = std::function<void(const nlohmann::json& event)>;

// Compares two secrets in time that depends only on their lengths' maximum.
bool constant_time_equal(std::string_view a, std::string_view b);

class ApiHandler {
 public:
  // token: the configured token ("" = none). REQUIRES: station outlives the handler.
  ApiHandler(Station& station, std::string token);
  ~ApiHandler();   // stops and joins the worker
  ApiHandler(const ApiHandler&) = delete;
  ApiHandler& operator=(const ApiHandler&) = delete;

  // Sets the watcher of every job's events (see EventTap). Call before serving.
  void set_event_tap(EventTap tap) { tap_ = std::move(tap); }

  // Handles one request line; the reply goes to `link` (events later, from the worker).
  // May be called from several threads at once (the API server's io thread, the page server's).
  // Returns false when the connection must be closed after the reply (oversized line).
  bool handle_line(const std::shared_ptr<ClientLink>& link, ConnectionState& state, std::string_view line);

  // Refuses new jobs, cancels the running one with `reason`, waits for it to end (its run is
  // stored as aborted). Idempotent.
  void stop(const std::string& reason);
  // Refuses new jobs and lets a running test finish (a calibration, or a test waiting for its
  // second connection, is cancelled: nobody will answer its prompts); returns when the worker
  // is idle.
  void finish_and_stop();

  // Runs `work` on the calling thread with the station busy as `kind` (no job may start; status
  // shows it), so clients served meanwhile are answered "busy" instead of waiting. The daemon
  // connects its instruments this way at start-up, when an instrument that does not answer can
  // hold it for its timeouts. REQUIRES: idle.
  void run_busy(const std::string& kind, const std::function<void()>& work);

 private:
  class ConnectPrompter;
  using Json = nlohmann::json;
  void dispatch(const std::shared_ptr<ClientLink>& link, ConnectionState& state, const Request& req);
  void reply(const std::shared_ptr<ClientLink>& link, const Json& id, Json result);
  void fail(const std::shared_ptr<ClientLink>& link, const Json& id, std::string_view code, std::string_view message);
  std::optional<std::string> busy_text() const;
  Json busy_json() const;
  // Starts `job` on the worker thread when idle; false when busy or stopping. The job returns
  // its final event line, sent to `link` only after the handler is idle again (so a client
  // may start the next job as soon as it reads the result).
  // `accepted` (the reply line) is sent before the job starts, so it precedes every event.
  bool start_job(std::string kind, Json busy, std::shared_ptr<ClientLink> link, std::string accepted,
                 std::function<std::string()> job);
  void set_progress(int point, int of, const std::string& standard);

  void call_hello(const std::shared_ptr<ClientLink>&, ConnectionState&, const Request&);
  void call_test_start(const std::shared_ptr<ClientLink>&, const Request&);
  void call_cal_start(const std::shared_ptr<ClientLink>&, const Request&, bool check_only);
  void call_cal_answer(const std::shared_ptr<ClientLink>&, const Request&);
  void call_cancel(const std::shared_ptr<ClientLink>&, const Request&);
  void call_probe(const std::shared_ptr<ClientLink>&, const Request&);
  void call_runs(const std::shared_ptr<ClientLink>&, const Request&);
  void call_report_lot(const std::shared_ptr<ClientLink>&, const Request&);
  void call_export(const std::shared_ptr<ClientLink>&, const Request&);
  void call_run_get(const std::shared_ptr<ClientLink>&, const Request&);
  void call_recipe_select(const std::shared_ptr<ClientLink>&, const Request&);
  void call_lot_summary(const std::shared_ptr<ClientLink>&, const Request&);
  void tap(Json event) const;

  Station& station_;
  std::string token_;
  EventTap tap_;

  mutable std::mutex mu_;            // guards the job state below
  std::condition_variable cv_;       // calibration answers, cancellation
  std::thread worker_;
  bool busy_ = false;
  bool stopping_ = false;
  Json busy_info_;                   // API.md "busy" object
  std::string awaiting_standard_;    // calibration prompt outstanding ("" = none)
  bool answered_ = false;
  CancelToken cancel_;
};

}  // namespace echoline::service
