// The forwarding outbox of the run store: the station's instance id, committed runs not yet in
// the central database (in commit order), whether runs are queued at all (not on a station without
// a central database), and the forwarder's last success. Same connection and mutex as the rest of
// RunStore (run_store_impl.hpp).
#include <algorithm>

#include <fmt/format.h>

#include "daemon/store/run_store.hpp"
#include "daemon/store/run_store_impl.hpp"

namespace echoline::store {

// Queues only while queueing is on (forwarding.unqueued_from_seq IS NULL). The condition is read
// in the same statement, so every connection follows the mode set_central_configured stored.
Status RunStore::Impl::enqueue(std::string_view run_id) {
  auto st = db.prepare(
      "INSERT INTO outbox(run_id, committed_utc) SELECT ?1, strftime('%Y-%m-%dT%H:%M:%fZ', 'now') "
      "WHERE (SELECT unqueued_from_seq FROM forwarding WHERE id = 1) IS NULL "
      "ON CONFLICT(run_id) DO NOTHING");
  if (!st.ok()) return st.error();
  st->bind(1, run_id);
  if (auto r = st->run(); !r.ok()) return fail(r.error(), fmt::format("queueing run '{}' for forwarding", run_id));
  return Status::success();
}

Result<ForwardingChange> RunStore::set_central_configured(bool configured, std::string_view utc) {
  std::lock_guard lock(impl_->mutex);
  ForwardingChange change;
  const std::string_view doing =
      configured ? "queueing runs for the central database" : "stopping the forwarding queue (no central database)";
  auto body = [&]() -> Status {
    auto from = impl_->db.prepare("SELECT unqueued_from_seq, coalesce(unqueued_since_utc, '') FROM forwarding WHERE id = 1");
    if (!from.ok()) return from.error();
    auto row = from->step();
    if (!row.ok()) return row.error();
    if (!*row) return make_error(ErrorKind::storage, "the forwarding row is missing");
    const bool was_off = !from->is_null(0);
    const long long unqueued_from = was_off ? from->integer(0) : 0;
    change.unqueued_since_utc = from->text(1);
    from->reset();
    if (configured) {
      if (!was_off) return Status::success();
      // Every finished run from the first one that may have gone unqueued, in store order. Some may
      // be in the central database already (queued, forwarded, then queueing stopped and restarted
      // with a lower mark): sending them again changes nothing there (same content hash).
      auto q = impl_->db.prepare(
          "INSERT INTO outbox(run_id, committed_utc) SELECT run_id, ended_utc FROM runs "
          "WHERE seq >= ?1 AND in_progress = 0 AND run_id NOT IN (SELECT run_id FROM outbox) ORDER BY seq");
      if (!q.ok()) return q.error();
      q->bind(1, unqueued_from);
      if (Status r = q->run(); !r.ok()) return r;
      change.queued = sqlite3_changes(impl_->db.handle());
      return impl_->db.exec("UPDATE forwarding SET unqueued_from_seq = NULL, unqueued_since_utc = NULL WHERE id = 1");
    }
    // Off: the mark goes down to the first run that is waiting, in progress (finished later,
    // unqueued) or not yet stored, and the waiting runs leave the outbox; refused ones stay with
    // their reason. Nothing is forgotten: configuring a central database queues them all again.
    auto mark = impl_->db.prepare(
        "SELECT min(coalesce(?1, 9223372036854775807), "
        "coalesce((SELECT min(r.seq) FROM runs r JOIN outbox o ON o.run_id = r.run_id WHERE o.refused IS NULL), "
        "9223372036854775807), "
        "coalesce((SELECT min(seq) FROM runs WHERE in_progress = 1), 9223372036854775807), "
        "(SELECT coalesce(max(seq), 0) + 1 FROM runs))");
    if (!mark.ok()) return mark.error();
    if (was_off) mark->bind(1, unqueued_from);
    else mark->bind_null(1);
    auto m = mark->step();
    if (!m.ok()) return m.error();
    const long long new_mark = mark->integer(0);
    mark->reset();
    auto del = impl_->db.prepare("DELETE FROM outbox WHERE refused IS NULL");
    if (!del.ok()) return del.error();
    if (Status r = del->run(); !r.ok()) return r;
    change.unqueued = sqlite3_changes(impl_->db.handle());
    if (!was_off) change.unqueued_since_utc = std::string(utc);
    auto upd = impl_->db.prepare("UPDATE forwarding SET unqueued_from_seq = ?1, unqueued_since_utc = ?2 WHERE id = 1");
    if (!upd.ok()) return upd.error();
    upd->bind(1, new_mark).bind(2, change.unqueued_since_utc);
    return upd->run();
  };
  Status s = impl_->transaction(doing, [&]() -> Status {
    if (Status b = body(); !b.ok()) return impl_->fail(b.error(), doing);
    return Status::success();
  });
  if (!s.ok()) return s.error();
  return change;
}

Result<std::string> RunStore::instance_id() {
  std::lock_guard lock(impl_->mutex);
  auto id = impl_->db.query_text("SELECT instance_id FROM station_identity WHERE id = 1");
  if (!id.ok()) return impl_->fail(id.error(), "reading the station instance id");
  return id.value();
}

Result<long long> RunStore::last_run_number() {
  std::lock_guard lock(impl_->mutex);
  // A run's row is written twice (ahead of the sweep, then replaced when it ends), so seq grows
  // faster than the runs: the number is the one in the run ids themselves, after their last '-'.
  // The newest rows by seq hold the newest number; a few more cover a run finalized late.
  auto st = impl_->db.prepare("SELECT run_id FROM runs ORDER BY seq DESC LIMIT 20");
  if (!st.ok()) return st.error();
  long long number = -1;
  for (;;) {
    auto row = st->step();
    if (!row.ok()) return impl_->fail(row.error(), "reading the last run number");
    if (!*row) break;
    const std::string id = st->text(0);
    const auto dash = id.rfind('-');
    if (dash == std::string::npos || dash + 1 == id.size()) continue;
    const std::string digits = id.substr(dash + 1);
    if (digits.size() > 18 || digits.find_first_not_of("0123456789") != std::string::npos) continue;
    number = std::max(number, std::stoll(digits));
  }
  if (number >= 0) return number;
  auto n = impl_->db.query_int("SELECT coalesce(max(seq), 0) FROM runs");   // no id in that form: as before
  if (!n.ok()) return impl_->fail(n.error(), "reading the last run number");
  return n.value();
}

Result<std::vector<OutboxEntry>> RunStore::outbox_peek(int limit) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare(
      "SELECT seq, run_id, committed_utc FROM outbox WHERE refused IS NULL ORDER BY seq LIMIT ?1");
  if (!st.ok()) return st.error();
  st->bind(1, static_cast<long long>(limit));
  std::vector<OutboxEntry> out;
  for (;;) {
    auto row = st->step();
    if (!row.ok()) return impl_->fail(row.error(), "reading the outbox");
    if (!*row) break;
    out.push_back({st->integer(0), st->text(1), st->text(2)});
  }
  return out;
}

Status RunStore::outbox_done(const std::vector<std::string>& run_ids, std::string_view utc) {
  if (run_ids.empty()) return Status::success();
  std::lock_guard lock(impl_->mutex);
  return impl_->transaction("removing forwarded runs from the outbox", [&]() -> Status {
    auto del = impl_->db.prepare("DELETE FROM outbox WHERE run_id = ?1");
    if (!del.ok()) return del.error();
    for (const auto& id : run_ids) {
      del->reset();
      del->bind(1, id);
      if (auto r = del->run(); !r.ok()) return r;
    }
    auto upd = impl_->db.prepare(
        "UPDATE forwarding SET last_forward_utc = ?1, last_run_id = ?2, forwarded_runs = forwarded_runs + ?3 "
        "WHERE id = 1");
    if (!upd.ok()) return upd.error();
    upd->bind(1, utc).bind(2, run_ids.back()).bind(3, static_cast<long long>(run_ids.size()));
    return upd->run();
  });
}

Status RunStore::outbox_refuse(std::string_view run_id, std::string_view why) {
  std::lock_guard lock(impl_->mutex);
  auto st = impl_->db.prepare("UPDATE outbox SET refused = ?2 WHERE run_id = ?1");
  if (!st.ok()) return st.error();
  st->bind(1, run_id).bind(2, why);
  if (auto r = st->run(); !r.ok()) return impl_->fail(r.error(), fmt::format("marking run '{}' refused", run_id));
  return Status::success();
}

Result<OutboxStatus> RunStore::outbox_status() {
  std::lock_guard lock(impl_->mutex);
  OutboxStatus s;
  auto st = impl_->db.prepare(
      "SELECT (SELECT waiting FROM outbox_counts WHERE id = 1), (SELECT refused FROM outbox_counts WHERE id = 1), "
      "coalesce((SELECT run_id FROM outbox WHERE refused IS NULL ORDER BY seq LIMIT 1), ''), "
      "coalesce((SELECT committed_utc FROM outbox WHERE refused IS NULL ORDER BY seq LIMIT 1), ''), "
      "coalesce(last_forward_utc, ''), coalesce(last_run_id, ''), forwarded_runs, unqueued_from_seq IS NULL, "
      "coalesce(unqueued_since_utc, '') FROM forwarding WHERE id = 1");
  if (!st.ok()) return st.error();
  auto row = st->step();
  if (!row.ok()) return impl_->fail(row.error(), "reading the outbox status");
  if (!*row) return s;
  s.depth = st->integer(0);
  s.refused = st->integer(1);
  s.oldest_run_id = st->text(2);
  s.oldest_committed_utc = st->text(3);
  s.last_forward_utc = st->text(4);
  s.last_run_id = st->text(5);
  s.forwarded_runs = st->integer(6);
  s.queueing = st->integer(7) != 0;
  s.unqueued_since_utc = st->text(8);
  return s;
}

}  // namespace echoline::store
