// The station's side of the central database: one connection as the station writer role, and
// one call that sends a batch of runs (with the calibrations, recipes and kit they refer to) in
// one transaction. Idempotent: the run id is the key (ON CONFLICT DO NOTHING), and a run already
// there is compared by content hash. Not thread-safe: the forwarder's thread owns it.
#pragma once

#include <memory>
#include <optional>
#include <set>
#include <string>

#include <pqxx/connection>
#include <vector>

#include "daemon/central/documents.hpp"
#include "daemon/central/settings.hpp"
#include "drivers/result.hpp"

namespace echoline::central {

struct RecipeText {
  std::string content_hash, name, version, text;
};

struct OutgoingRun {
  long long station_seq = 0;                 // the station's commit order
  core::RunResult run;                       // with points
  SentDocument document;                     // run_document(run)
  std::optional<core::CalibrationRecord> calibration;   // the one it used, when stored
  std::optional<RecipeText> recipe;          // the recipe text by content hash, when stored
};

// different_calibration: the run was not stored because the central database holds other
// content under its calibration's id (central_hash is that calibration's hash).
enum class SendResult { stored, already_there, different_content, different_calibration };

struct SentRun {
  std::string run_id;
  SendResult result = SendResult::stored;
  std::string central_hash;   // for different_content / different_calibration: what the central database holds
  std::string local_hash;     // for different_calibration: this station's calibration document hash
};

class CentralWriter {
 public:
  // REQUIRES: settings outlive nothing (copied). Does not connect yet.
  CentralWriter(CentralSettings settings, std::string station_instance, KitDocument kit);
  ~CentralWriter();
  CentralWriter(const CentralWriter&) = delete;
  CentralWriter& operator=(const CentralWriter&) = delete;

  // Connects when not connected and checks the schema version. Errors (ErrorKind::io: cannot
  // connect; ErrorKind::storage: wrong schema) name the database by its description and are
  // scrubbed of the password.
  Status connect();
  bool connected() const;
  void disconnect();

  // Sends `runs` in one transaction, in the given order. On error nothing of the batch is kept
  // by the database, the connection is dropped and the error returned (scrubbed).
  Result<std::vector<SentRun>> send(const std::vector<OutgoingRun>& runs);

  const CentralSettings& settings() const { return settings_; }

 private:
  Error failure(ErrorKind kind, std::string_view doing, std::string_view what) const;
  CentralSettings settings_;
  std::string instance_;
  KitDocument kit_;
  std::unique_ptr<pqxx::connection> conn_;
  // Content hashes (and calibration ids) the database already has from this connection's
  // lifetime or earlier sends: not sent again.
  std::set<std::string> sent_recipes_, sent_calibrations_;
  bool kit_sent_ = false;
};

}  // namespace echoline::central
