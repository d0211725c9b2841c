// Forwarder: outbox -> central database, in commit order, with backoff.
#include "daemon/central/forwarder.hpp"

#include <algorithm>
#include <chrono>
#include <ctime>

#include <fmt/format.h>
#include <spdlog/spdlog.h>

#include "daemon/central/writer.hpp"

namespace echoline::central {
namespace {

std::string now_utc() {
  using namespace std::chrono;
  const auto now = system_clock::now();
  const auto ms = duration_cast<milliseconds>(now.time_since_epoch()).count();
  const std::time_t t = static_cast<std::time_t>(ms / 1000);
  std::tm tm{};
  gmtime_r(&t, &tm);
  return fmt::format("{:04}-{:02}-{:02}T{:02}:{:02}:{:02}.{:03}Z", tm.tm_year + 1900, tm.tm_mon + 1, tm.tm_mday, tm.tm_hour,
                     tm.tm_min, tm.tm_sec, ms % 1000);
}

}  // namespace

Forwarder::Forwarder(std::filesystem::path store_file, store::StoreOptions store_options, CentralSettings settings,
                     KitDocument kit)
    : store_file_(std::move(store_file)),
      store_options_(std::move(store_options)),
      settings_(std::move(settings)),
      kit_(std::move(kit)) {
  thread_ = std::thread([this] { loop(); });
}

Forwarder::~Forwarder() { stop(); }

void Forwarder::stop() {
  {
    std::lock_guard lock(mu_);
    stopping_ = true;
  }
  cv_.notify_all();
  if (thread_.joinable()) thread_.join();
}

void Forwarder::nudge() {
  {
    std::lock_guard lock(mu_);
    nudged_ = true;
  }
  cv_.notify_all();
}

bool Forwarder::wait_for(double seconds) {
  std::unique_lock lock(mu_);
  cv_.wait_for(lock, std::chrono::duration<double>(seconds), [&] { return stopping_ || nudged_; });
  nudged_ = false;
  return !stopping_;
}

void Forwarder::set_state(std::string state, std::string error, double retry_in_s) {
  std::lock_guard lock(mu_);
  state_ = std::move(state);
  last_error_ = std::move(error);
  retry_in_s_ = retry_in_s;
}

nlohmann::json Forwarder::status_json() const {
  std::lock_guard lock(mu_);
  return {{"target", settings_.description}, {"state", state_},           {"last_error", last_error_},
          {"retry_in_s", retry_in_s_},      {"sent_this_start", sent_},   {"duplicates_this_start", duplicates_},
          {"refused_this_start", refused_}};
}

void Forwarder::loop() {
  auto opened = store::RunStore::open(store_file_, store_options_);
  if (!opened) {
    spdlog::error("forwarder: {}; runs are not forwarded until the daemon restarts", opened.error().message);
    set_state("stopped", opened.error().message);
    return;
  }
  store::RunStore& st = **opened;
  auto instance = st.instance_id();
  if (!instance) {
    set_state("stopped", instance.error().message);
    return;
  }
  CentralWriter writer(settings_, *instance, kit_);
  double backoff = settings_.retry_min_s;
  bool failing = false;
  std::chrono::steady_clock::time_point failing_since;
  spdlog::info("forwarder: runs go to the central database {}", settings_.description);

  auto fail = [&](const std::string& message) {
    if (!failing) {
      spdlog::warn("forwarder: {}; the runs wait in the outbox, retrying", message);
      failing = true;
      failing_since = std::chrono::steady_clock::now();
    } else {
      spdlog::debug("forwarder: still failing: {}", message);
    }
    set_state("retrying", message, backoff);
    const double wait = backoff;
    backoff = std::min(backoff * 2, settings_.retry_max_s);
    std::unique_lock lock(mu_);
    cv_.wait_for(lock, std::chrono::duration<double>(wait), [&] { return stopping_; });
  };

  for (;;) {
    {
      std::lock_guard lock(mu_);
      if (stopping_) break;
    }
    auto batch = st.outbox_peek(settings_.batch_runs);
    if (!batch) {
      fail(batch.error().message);
      continue;
    }
    if (batch->empty()) {
      if (!failing) set_state("idle");
      if (!wait_for(1.0)) break;
      continue;
    }
    set_state("sending", failing ? last_error_ : std::string());
    std::vector<OutgoingRun> out;
    out.reserve(batch->size());
    Status loaded = Status::success();
    for (const auto& e : *batch) {
      auto run = st.load_run(e.run_id);
      if (!run) {
        loaded = run.error();
        break;
      }
      OutgoingRun o;
      o.station_seq = e.seq;
      o.run = std::move(run.value());
      o.document = run_document(o.run);
      if (!o.run.calibration_id.empty()) {
        // A calibration that cannot be read now fails the batch (retried later): sent without it,
        // the run could not be checked against the calibration the database holds under its id.
        auto cal = st.load_calibration(o.run.calibration_id);
        if (!cal) {
          loaded = cal.error();
          break;
        }
        if (!cal->has_value()) {
          // The store no longer holds the calibration that judged the run (a store edited by
          // hand, a restored file): sent without it, the central copy could not be recomputed or
          // checked. Kept in the outbox and not retried, like other content under the same id.
          const std::string why = fmt::format(
              "its calibration {} is not in this station's store, so the run cannot be sent with the calibration "
              "that judged it",
              o.run.calibration_id);
          spdlog::error("forwarder: run {} refused: {}; it stays in the outbox, not retried", e.run_id, why);
          if (Status s = st.outbox_refuse(e.run_id, why); !s.ok()) {
            loaded = s;
            break;
          }
          std::lock_guard lock(mu_);
          ++refused_;
          continue;
        }
        o.calibration = std::move(cal->value());
      }
      auto text = st.recipe_text(o.run.recipe.content_hash);
      if (text && text->has_value()) {
        o.recipe = RecipeText{o.run.recipe.content_hash, o.run.recipe.name, o.run.recipe.version, text->value()};
      }
      out.push_back(std::move(o));
    }
    if (!loaded.ok()) {
      fail(loaded.error().message);
      continue;
    }
    if (out.empty()) continue;   // every run of the batch was refused here
    auto sent = writer.send(out);
    if (!sent) {
      fail(sent.error().message);
      continue;
    }
    std::vector<std::string> done;
    for (std::size_t i = 0; i < sent->size(); ++i) {
      const SentRun& s = (*sent)[i];
      if (s.result == SendResult::different_content || s.result == SendResult::different_calibration) {
        const std::string why =
            s.result == SendResult::different_content
                ? fmt::format("the central database holds other content under this run id (hash {}, this station's {})",
                              s.central_hash, out[i].document.content_hash)
                : fmt::format("the central database holds another calibration under this run's calibration id {} "
                              "(hash {}, this station's {}): two stations share a name, or the store was started over",
                              out[i].run.calibration_id, s.central_hash, s.local_hash);
        spdlog::error("forwarder: run {} refused: {}; it stays in the outbox, not retried", s.run_id, why);
        (void)st.outbox_refuse(s.run_id, why);
        std::lock_guard lock(mu_);
        ++refused_;
        continue;
      }
      done.push_back(s.run_id);
      std::lock_guard lock(mu_);
      if (s.result == SendResult::already_there) ++duplicates_;
      else ++sent_;
    }
    if (Status s = st.outbox_done(done, now_utc()); !s.ok()) {
      // The central database has them; the next pass finds them there (same hash) and retries this.
      fail(s.error().message);
      continue;
    }
    if (failing) {
      const double down = std::chrono::duration<double>(std::chrono::steady_clock::now() - failing_since).count();
      spdlog::info("forwarder: forwarding again after {:.1f} s", down);
      failing = false;
    }
    backoff = settings_.retry_min_s;
    set_state("sending");
  }
  set_state("stopped");
}

}  // namespace echoline::central
