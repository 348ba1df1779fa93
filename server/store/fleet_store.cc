// FleetStore (fleet_store.h). The worker list is the workers table read
// newest first: a database whose workers table has a `sandbox` column (added
// with the worker sandbox) shows it; one without shows none.
#include "server/store/fleet_store.h"

#include <sys/random.h>

#include <cerrno>
#include <cstring>
#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"

namespace skerry::store {

absl::StatusOr<std::vector<FleetStore::WorkerRow>> FleetStore::ListWorkers(
    int limit) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  bool has_sandbox = false;
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto info,
        reader->Prepare("SELECT name FROM pragma_table_info('workers')"));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, info.Step());
      if (!row) break;
      if (info.ColumnText(0) == "sandbox") has_sandbox = true;
    }
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->Prepare(absl::StrCat(
          "SELECT id, name, host, threads, evaluators, version, joined_ms, "
          "last_seen_ms, ",
          has_sandbox ? "sandbox" : "NULL",
          " FROM workers ORDER BY last_seen_ms DESC, id DESC LIMIT ?")));
  s.BindInt(1, limit);
  std::vector<WorkerRow> rows;
  while (true) {
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row) break;
    WorkerRow w;
    w.worker.id = s.ColumnInt(0);
    w.worker.name = s.ColumnText(1);
    w.worker.host = s.ColumnText(2);
    w.worker.threads = static_cast<uint32_t>(s.ColumnInt(3));
    w.worker.evaluators = s.ColumnText(4);
    w.worker.version = s.ColumnText(5);
    w.worker.joined_ms = s.ColumnInt(6);
    w.worker.last_seen_ms = s.ColumnInt(7);
    if (has_sandbox && !s.ColumnIsNull(8)) w.sandbox = s.ColumnText(8);
    rows.push_back(std::move(w));
  }
  return rows;
}

absl::StatusOr<std::string> FleetStore::FleetKey() {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto get,
        w->Prepare("SELECT key FROM fleet_keys WHERE name = 'fleet'"));
    SKERRY_ASSIGN_OR_RETURN(bool row, get.Step());
    if (row) return get.ColumnBlob(0);
  }
  std::string key(32, '\0');
  size_t got = 0;
  while (got < key.size()) {
    const ssize_t n = getrandom(key.data() + got, key.size() - got, 0);
    if (n < 0 && errno == EINTR) continue;
    if (n < 0) {
      return absl::InternalError(
          absl::StrCat("getrandom for the fleet key: ", std::strerror(errno)));
    }
    got += static_cast<size_t>(n);
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto put,
      w->Prepare("INSERT INTO fleet_keys (name, key) VALUES ('fleet', ?)"));
  put.BindBlob(1, key);
  SKERRY_RETURN_IF_ERROR(put.Run());
  SKERRY_RETURN_IF_ERROR(txn.Commit());
  return key;
}

absl::StatusOr<int64_t> FleetStore::RegisterWorker(const WorkerRecord& worker) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(
      auto ins,
      w->Prepare("INSERT INTO workers (name, host, threads, "
                 "evaluators, version, joined_ms, last_seen_ms, sandbox) "
                 "VALUES (?,?,?,?,?,?,?,?)"));
  ins.BindText(1, worker.name);
  ins.BindText(2, worker.host);
  ins.BindInt(3, worker.threads);
  ins.BindText(4, worker.evaluators);
  ins.BindText(5, worker.version);
  ins.BindInt(6, worker.joined_ms);
  ins.BindInt(7, worker.last_seen_ms);
  ins.BindText(8, worker.sandbox);
  SKERRY_RETURN_IF_ERROR(ins.Run());
  return w->LastInsertId();
}

absl::Status FleetStore::TouchWorkers(absl::Span<const int64_t> ids,
                                      int64_t now_ms) {
  if (ids.empty()) return absl::OkStatus();
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  SKERRY_ASSIGN_OR_RETURN(
      auto upd, w->Prepare("UPDATE workers SET last_seen_ms = ? WHERE id = ?"));
  for (int64_t id : ids) {
    upd.BindInt(1, now_ms);
    upd.BindInt(2, id);
    SKERRY_RETURN_IF_ERROR(upd.Run());
  }
  return txn.Commit();
}

absl::StatusOr<int> FleetStore::CountWorkersSeenSince(int64_t since_ms) {
  SKERRY_ASSIGN_OR_RETURN(ReadPool::Lease reader, db_->Reader());
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      reader->Prepare("SELECT count(*) FROM workers WHERE last_seen_ms >= ?"));
  s.BindInt(1, since_ms);
  SKERRY_ASSIGN_OR_RETURN(auto row, s.Step());
  return row ? static_cast<int>(s.ColumnInt(0)) : 0;
}

}  // namespace skerry::store
