// The forwarder in echolined: its own thread ships every committed run from the station's
// outbox to the central database, oldest commit first, in batches; retries with backoff while
// the database is unreachable; never touches the thread that runs tests (it reads the store
// through its own SQLite connection, so a test only ever waits for its short outbox updates).
// Thread-safe: nudge(), status_json() and stop() from any thread.
#pragma once

#include <atomic>
#include <condition_variable>
#include <filesystem>
#include <mutex>
#include <string>
#include <thread>

#include <nlohmann/json.hpp>

#include "daemon/central/documents.hpp"
#include "daemon/central/settings.hpp"
#include "daemon/store/run_store.hpp"

namespace echoline::central {

class Forwarder {
 public:
  // store_file: the station's run store (already opened and migrated by the station).
  // Starts the thread at once.
  Forwarder(std::filesystem::path store_file, store::StoreOptions store_options, CentralSettings settings,
            KitDocument kit);
  ~Forwarder();   // stop()
  Forwarder(const Forwarder&) = delete;
  Forwarder& operator=(const Forwarder&) = delete;

  void nudge();   // a run was committed: look at the outbox now
  void stop();    // ends the thread; idempotent
  // {"target", "state": "idle"|"sending"|"retrying"|"stopped", "last_error", "retry_in_s",
  //  "sent_this_start", "duplicates_this_start", "refused_this_start"}
  nlohmann::json status_json() const;

 private:
  void loop();
  bool wait_for(double seconds);   // false when stopping
  void set_state(std::string state, std::string error = {}, double retry_in_s = 0);

  std::filesystem::path store_file_;
  store::StoreOptions store_options_;
  CentralSettings settings_;
  KitDocument kit_;

  mutable std::mutex mu_;
  std::condition_variable cv_;
  bool stopping_ = false;
  bool nudged_ = false;
  std::string state_ = "idle";
  std::string last_error_;
  double retry_in_s_ = 0;
  long long sent_ = 0, duplicates_ = 0, refused_ = 0;
  std::thread thread_;
};

}  // namespace echoline::central
