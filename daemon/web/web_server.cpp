// The page server: routes, sessions, guards, server-sent events and /metrics over cpp-httplib.
#include "daemon/web/web_server.hpp"

#include <atomic>
#include <chrono>
#include <map>
#include <mutex>
#include <set>
#include <stdexcept>
#include <thread>

#include <fmt/format.h>
#include <httplib.h>
#include <spdlog/spdlog.h>

#include "daemon/client/unit_advice.hpp"
#include "daemon/service/api_protocol.hpp"
#include "daemon/service/clock.hpp"
#include "daemon/store/lot_report.hpp"
#include "daemon/web/event_bus.hpp"
#include "daemon/web/metrics.hpp"
#include "daemon/web/web_assets.hpp"
#include "daemon/web/web_guard.hpp"

namespace echoline::web {
namespace {

using nlohmann::json;
using Clock = std::chrono::steady_clock;

constexpr int kRequestThreads = 24;        // each event stream holds one
constexpr int kMaxStreams = 16;            // event streams at once; more get 503
constexpr auto kSessionGrace = std::chrono::seconds(20);   // a page reloading keeps its calibration
constexpr std::size_t kMaxSessions = 256;
constexpr std::size_t kMaxBody = 64 * 1024;

std::int64_t now_ms() {
  return std::chrono::duration_cast<std::chrono::milliseconds>(Clock::now().time_since_epoch()).count();
}

// One page's standing with the station: its role (as a connection of the JSON-lines API) and
// whether it is still there (its event stream, or a request within the grace period).
struct Session {
  explicit Session(bool peer_loopback) {
    state.loopback = peer_loopback;
    state.role = peer_loopback ? service::Role::operator_ : service::Role::none;
  }
  std::mutex mu;                    // guards state; held through one API call
  service::ConnectionState state;
  std::atomic<int> streams{0};
  std::atomic<std::int64_t> last_seen_ms{now_ms()};
  void touch() { last_seen_ms = now_ms(); }
  bool alive() const {
    return streams.load() > 0 ||
           now_ms() - last_seen_ms.load() < std::chrono::duration_cast<std::chrono::milliseconds>(kSessionGrace).count();
  }
};

// The link one page request hands the ApiHandler: the reply (always the first line) becomes the
// HTTP answer; job events reach the page through the event stream instead, so later lines are
// dropped here. Alive while its page is.
class RequestLink : public service::ClientLink {
 public:
  explicit RequestLink(std::shared_ptr<Session> s) : session_(std::move(s)) {}
  void send(std::string line) override {
    std::lock_guard lock(mu_);
    if (!have_) {
      reply_ = std::move(line);
      have_ = true;
    }
  }
  bool alive() const override { return session_ ? session_->alive() : false; }
  std::string reply() {
    std::lock_guard lock(mu_);
    return reply_;
  }

 private:
  std::shared_ptr<Session> session_;
  std::mutex mu_;
  std::string reply_;
  bool have_ = false;
};

void json_answer(httplib::Response& res, int status, const json& body) {
  res.status = status;
  res.set_content(service::dump_safe(body), "application/json");
}

void refuse(httplib::Response& res, int status, const std::string& code, const std::string& message) {
  json_answer(res, status, {{"ok", false}, {"error", {{"code", code}, {"message", message}}}});
}

}  // namespace

struct WebServer::Impl {
  service::ApiHandler& handler;
  service::Station& station;
  WebOptions options;
  httplib::Server server;
  EventBus bus;
  CycleHistogram cycles{service::unix_now_s()};
  std::thread thread;
  std::string address;
  int port = 0;
  std::atomic<int> streams{0};
  std::atomic<bool> stopped{false};

  std::mutex sessions_mu;
  std::map<std::string, std::shared_ptr<Session>> sessions;
  std::mutex inconclusive_mu;
  std::set<std::string> inconclusive_serials;   // judged inconclusive since the daemon started

  Impl(service::ApiHandler& h, service::Station& s, WebOptions o) : handler(h), station(s), options(std::move(o)) {}

  // --- events from the station (worker thread: quick, never waits for a page) ---
  void on_event(const json& event) {
    json e = event;
    e["at_unix_ms"] = static_cast<std::int64_t>(service::unix_now_s() * 1000.0);
    if (e.value("event", "") == "result" && e.contains("run") && e["run"].is_object()) {
      json& run = e["run"];
      if (run.contains("timings") && run["timings"].is_object()) cycles.observe(run["timings"].value("total_s", -1.0));
      // The tray and next step, worded as the console words them (daemon/client/unit_advice).
      const std::string serial = run.value("serial", "");
      bool before = false;
      {
        std::lock_guard lock(inconclusive_mu);
        before = inconclusive_serials.count(serial) > 0;
        if (run.value("verdict", "") == "inconclusive") inconclusive_serials.insert(serial);
      }
      const client::UnitAdvice advice = client::advise(run, before);
      e["advice"] = {{"action", advice.action}, {"detail", advice.detail}, {"metrics", client::metrics_line(run)}};
    }
    bus.publish(service::dump_safe(e));
  }

  // --- sessions ---
  std::shared_ptr<Session> find_session(const std::string& id) {
    std::lock_guard lock(sessions_mu);
    auto it = sessions.find(id);
    return it == sessions.end() ? nullptr : it->second;
  }
  std::pair<std::string, std::shared_ptr<Session>> new_session(bool loopback) {
    std::lock_guard lock(sessions_mu);
    if (sessions.size() >= kMaxSessions) {
      for (auto it = sessions.begin(); it != sessions.end();) {
        it = it->second->alive() ? std::next(it) : sessions.erase(it);
      }
    }
    auto s = std::make_shared<Session>(loopback);
    std::string id = random_token();
    sessions[id] = s;
    return {id, s};
  }
  std::shared_ptr<Session> session_of(const httplib::Request& req) {
    std::string id = req.get_header_value(kSessionHeader);
    if (id.empty() && req.has_param("session")) id = req.get_param_value("session");
    auto s = id.empty() ? nullptr : find_session(id);
    if (s) s->touch();
    return s;
  }

  // One API request through the handler, as the session's connection; returns the reply line.
  std::string call(const std::shared_ptr<Session>& s, std::string_view line) {
    auto link = std::make_shared<RequestLink>(s);
    std::lock_guard lock(s->mu);
    handler.handle_line(link, s->state, line);
    std::string reply = link->reply();
    if (!reply.empty() && reply.back() == '\n') reply.pop_back();
    return reply;
  }

  bool peer_loopback(const httplib::Request& req) const { return is_loopback_address(req.remote_addr); }

  bool bearer_ok(const httplib::Request& req) const {
    const std::string auth = req.get_header_value("Authorization");
    const std::string prefix = "Bearer ";
    return !options.token.empty() && auth.rfind(prefix, 0) == 0 &&
           service::constant_time_equal(auth.substr(prefix.size()), options.token);
  }

  void routes();
  void serve_asset(const std::string& name, httplib::Response& res);
  void events(const httplib::Request& req, httplib::Response& res);
  void metrics(const httplib::Request& req, httplib::Response& res);
  void plot(const httplib::Request& req, httplib::Response& res);
};

void WebServer::Impl::serve_asset(const std::string& name, httplib::Response& res) {
  const Asset* a = find_asset(name);
  if (!a) return refuse(res, 404, "not_found", fmt::format("no page or file \"{}\"", name));
  res.set_content(std::string(a->body), std::string(a->media_type).c_str());
}

void WebServer::Impl::routes() {
  server.new_task_queue = [] { return new httplib::ThreadPool(kRequestThreads); };
  server.set_payload_max_length(kMaxBody);
  server.set_keep_alive_timeout(2);
  server.set_read_timeout(5);
  server.set_write_timeout(5);
  // Small replies on kept-alive connections: without TCP_NODELAY each waited ~40 ms for the
  // peer's delayed ACK (measured on loopback).
  server.set_tcp_nodelay(true);

  // Every answer: security headers; a request naming a foreign host is refused before routing.
  server.set_pre_routing_handler([this](const httplib::Request& req, httplib::Response& res) {
    // No compression: cpp-httplib 0.11 answers "br" with brotli at quality 11, which took ~60 ms
    // of CPU per 15 kB file here; the files are small and the pages are local. The request is the
    // server's own object, handed over as const only.
    const_cast<httplib::Request&>(req).headers.erase("Accept-Encoding");
    res.set_header("Content-Security-Policy", kPageCsp);
    res.set_header("X-Content-Type-Options", "nosniff");
    res.set_header("Referrer-Policy", "no-referrer");
    res.set_header("X-Frame-Options", "DENY");
    res.set_header("Cache-Control", "no-store");
    if (!host_allowed(req.get_header_value("Host"), options.host, port, peer_loopback(req))) {
      refuse(res, 421, "bad_host", fmt::format("Host \"{}\" is not this station", req.get_header_value("Host")));
      return httplib::Server::HandlerResponse::Handled;
    }
    if (req.method == "POST") {
      if (!origin_allowed(req.get_header_value("Origin"), req.get_header_value("Host"))) {
        refuse(res, 403, "cross_origin", fmt::format("Origin \"{}\" may not change this station", req.get_header_value("Origin")));
        return httplib::Server::HandlerResponse::Handled;
      }
      if (req.get_header_value("Content-Type").rfind("application/json", 0) != 0) {
        refuse(res, 415, "bad_request", "POST bodies are JSON (Content-Type: application/json)");
        return httplib::Server::HandlerResponse::Handled;
      }
    }
    return httplib::Server::HandlerResponse::Unhandled;
  });

  server.Get("/", [this](const httplib::Request&, httplib::Response& res) { serve_asset("operator.html", res); });
  server.Get("/operator", [this](const httplib::Request&, httplib::Response& res) { serve_asset("operator.html", res); });
  server.Get("/supervisor", [this](const httplib::Request&, httplib::Response& res) { serve_asset("supervisor.html", res); });
  server.Get(R"(/assets/([a-z0-9-]+\.(?:js|css|svg)))", [this](const httplib::Request& req, httplib::Response& res) {
    serve_asset(req.matches[1], res);
  });

  // A page's session: loopback pages are operators at once, like the Unix socket; a remote page
  // presents the API token (hello). Body: {"token"?, "client"?, "resume"?}.
  server.Post("/session", [this](const httplib::Request& req, httplib::Response& res) {
    if (req.get_header_value(kSessionHeader).empty()) {
      return refuse(res, 403, "forbidden", fmt::format("the {} header is missing", kSessionHeader));
    }
    json body = json::parse(req.body.empty() ? "{}" : req.body, nullptr, false);
    if (!body.is_object()) return refuse(res, 400, "bad_request", "session: the body is not a JSON object");
    if (body.contains("resume") && body["resume"].is_string()) {
      if (auto s = find_session(body["resume"].get<std::string>()); s && s->state.loopback == peer_loopback(req)) {
        s->touch();
        return json_answer(res, 200, {{"ok", true}, {"session", body["resume"]}, {"resumed", true}});
      }
    }
    auto [id, s] = new_session(peer_loopback(req));
    json hello = {{"v", 1}, {"id", "session"}, {"call", "hello"},
                  {"args", {{"role", "operator"}, {"client", body.value("client", "page")}}}};
    if (body.contains("token") && body["token"].is_string()) hello["args"]["token"] = body["token"];
    const std::string reply = call(s, service::dump_safe(hello));
    json r = json::parse(reply, nullptr, false);
    if (!r.is_object() || !r.value("ok", false)) {
      std::lock_guard lock(sessions_mu);
      sessions.erase(id);
      return json_answer(res, 401, r.is_object() ? r : json{{"ok", false}});
    }
    json_answer(res, 200, {{"ok", true}, {"session", id}, {"resumed", false}, {"hello", r["result"]}});
  });

  // The page API: one request object of the JSON-lines API (API.md), its reply as the answer.
  server.Post("/api", [this](const httplib::Request& req, httplib::Response& res) {
    auto s = session_of(req);
    if (!s) return refuse(res, 401, "no_session", "no such session: open the page again");
    const std::string reply = call(s, req.body);
    if (reply.empty()) return refuse(res, 500, "internal", "the API gave no reply");
    res.set_content(reply, "application/json");
  });

  server.Get("/events", [this](const httplib::Request& req, httplib::Response& res) { events(req, res); });
  server.Get("/metrics", [this](const httplib::Request& req, httplib::Response& res) { metrics(req, res); });
  server.Get(R"(/plot/([A-Za-z0-9._-]+)\.svg)", [this](const httplib::Request& req, httplib::Response& res) { plot(req, res); });
}

void WebServer::Impl::events(const httplib::Request& req, httplib::Response& res) {
  auto s = session_of(req);
  if (!s) return refuse(res, 404, "no_session", "no such session: open the page again");
  if (streams.load() >= kMaxStreams) return refuse(res, 503, "busy", "too many pages are open on this station");
  ++streams;
  ++s->streams;
  auto cursor = std::make_shared<std::uint64_t>(bus.last_seq());
  auto first = std::make_shared<bool>(true);
  auto last_write = std::make_shared<Clock::time_point>(Clock::now());
  res.set_header("X-Accel-Buffering", "no");
  res.set_chunked_content_provider(
      "text/event-stream",
      [this, cursor, first, last_write](std::size_t, httplib::DataSink& sink) {
        auto write = [&](const std::string& text) {
          *last_write = Clock::now();
          return sink.write(text.data(), text.size());
        };
        if (*first) {
          *first = false;
          return write(fmt::format("retry: 1000\nevent: ready\ndata: {}\n\n",
                                   service::dump_safe({{"station", station.config().station}, {"seq", *cursor}})));
        }
        bool lost = false;
        auto batch = bus.wait_after(*cursor, std::chrono::milliseconds(1000), lost);
        if (stopped.load() || bus.stopped()) {
          sink.done();
          return true;
        }
        if (lost && !write("event: resync\ndata: {}\n\n")) return false;
        for (const auto& e : batch) {
          *cursor = e.seq;
          if (!write(fmt::format("id: {}\ndata: {}\n\n", e.seq, e.data))) return false;
        }
        if (Clock::now() - *last_write > std::chrono::seconds(10) && !write(": still here\n\n")) return false;
        return sink.is_writable();
      },
      [this, s](bool) {
        --streams;
        --s->streams;
        s->touch();
      });
}

void WebServer::Impl::metrics(const httplib::Request& req, httplib::Response& res) {
  if (!peer_loopback(req) && !bearer_ok(req)) {
    res.set_header("WWW-Authenticate", "Bearer");
    return refuse(res, 401, "unauthorized", "metrics: a remote scraper sends the station token as a Bearer token");
  }
  MetricsInput in;
  in.station = station.config().station;
  auto yield = station_yield(station.store(), in.station);
  if (!yield) return refuse(res, 500, "storage", yield.error().message);
  in.yield = std::move(yield.value());
  auto s = std::make_shared<Session>(true);   // an internal operator connection for the status call
  json status = json::parse(call(s, R"({"v":1,"id":0,"call":"status"})"), nullptr, false);
  if (status.is_object() && status.value("ok", false)) in.status = status["result"];
  in.cycles = cycles.snapshot();
  in.now_unix_s = service::unix_now_s();
  res.set_content(render_openmetrics(in), kOpenMetricsType);
}

void WebServer::Impl::plot(const httplib::Request& req, httplib::Response& res) {
  auto s = session_of(req);
  if (!s) return refuse(res, 401, "no_session", "no such session: open the page again");
  {
    std::lock_guard lock(s->mu);
    if (s->state.role == service::Role::none) return refuse(res, 401, "unauthorized", "the station token is needed");
  }
  auto run = station.store().load_run(std::string(req.matches[1]));
  if (!run) return refuse(res, 404, "not_found", fmt::format("no run \"{}\" is stored", std::string(req.matches[1])));
  res.headers.erase("Content-Security-Policy");
  res.set_header("Content-Security-Policy", kImageCsp);
  res.set_content(store::unit_trace_svg(*run, station.recipe()->limits, 640, 300), "image/svg+xml");
}

WebServer::WebServer(service::ApiHandler& handler, service::Station& station, WebOptions options)
    : impl_(std::make_unique<Impl>(handler, station, std::move(options))) {
  Impl& m = *impl_;
  if (!is_loopback_address(m.options.host) && m.options.host != "localhost" && m.options.token.empty()) {
    throw std::runtime_error(fmt::format("web: serving the pages on {} (not loopback) needs the API token "
                                         "(api.token_file); refusing to listen", m.options.host));
  }
  m.routes();
  if (m.options.port < 0) {
    m.port = m.server.bind_to_any_port(m.options.host);
  } else {
    m.port = m.server.bind_to_port(m.options.host, m.options.port) ? m.options.port : -1;
  }
  if (m.port <= 0) {
    throw std::runtime_error(fmt::format("web: cannot listen on {}:{}", m.options.host, m.options.port));
  }
  m.address = fmt::format("{}:{}", m.options.host.find(':') != std::string::npos ? "[" + m.options.host + "]" : m.options.host, m.port);
  handler.set_event_tap([&m](const json& event) { m.on_event(event); });
  m.thread = std::thread([&m] { m.server.listen_after_bind(); });
}

WebServer::~WebServer() { stop(); }

void WebServer::stop() {
  if (!impl_ || impl_->stopped.exchange(true)) return;
  impl_->bus.stop();
  impl_->server.stop();
  if (impl_->thread.joinable()) impl_->thread.join();
}

std::string WebServer::address() const { return impl_->address; }

}  // namespace echoline::web
