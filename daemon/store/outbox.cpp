// The forwarding outbox of the run store: the station's instance id, committed runs not yet in
// the central database (in commit order), and the forwarder's last success. Same connection and
// mutex as the rest of RunStore (run_store_impl.hpp).
#include <fmt/format.h>

#include "daemon/store/run_store.hpp"
#include "daemon/store/run_store_impl.hpp"

namespace echoline::store {

Status RunStore::Impl::enqueue(std::string_view run_id) {
  auto st = db.prepare(
      "INSERT INTO outbox(run_id, committed_utc) VALUES(?1, strftime('%Y-%m-%dT%H:%M:%fZ', 'now')) "
      "ON CONFLICT(run_id) DO NOTHING");
  if (!st.ok()) return st.error();
  st->bind(1, run_id);
  if (auto r = st->run(); !r.ok()) return fail(r.error(), fmt::format("queueing run '{}' for forwarding", run_id));
  return Status::success();
}

Result<std::string> RunStore::instance_id() {
  std::lock_guard lock(impl_->mutex);
  auto id = impl_->db.query_text("SELECT instance_id FROM station_identity WHERE id = 1");
  if (!id.ok()) return impl_->fail(id.error(), "reading the station instance id");
  return id.value();
}

Result<long long> RunStore::last_run_seq() {
  std::lock_guard lock(impl_->mutex);
  auto n = impl_->db.query_int("SELECT coalesce(max(seq), 0) FROM runs");
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
      "coalesce(last_forward_utc, ''), coalesce(last_run_id, ''), forwarded_runs FROM forwarding WHERE id = 1");
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
  return s;
}

}  // namespace echoline::store
