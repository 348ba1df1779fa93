// The store's worker list (store.h, ListWorkers): the workers table read
// newest first. A database whose workers table has a `sandbox` column
// (added with the worker sandbox) shows it; one without shows none. Also the
// fleet key (Store::FleetKey).
#include <sys/random.h>

#include <cerrno>
#include <cstring>
#include <string>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/store.h"

namespace skerry::store {

absl::StatusOr<std::vector<Store::WorkerRow>> Store::ListWorkers(int limit) {
  absl::MutexLock l(&mu_);
  bool has_sandbox = false;
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto info,
        conn_->Prepare("SELECT name FROM pragma_table_info('workers')"));
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, info.Step());
      if (!row) break;
      if (info.ColumnText(0) == "sandbox") has_sandbox = true;
    }
  }
  SKERRY_ASSIGN_OR_RETURN(
      auto s,
      conn_->Prepare(absl::StrCat(
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

}  // namespace skerry::store

namespace skerry::store {

absl::StatusOr<std::string> Store::FleetKey() {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto get,
        conn_->Prepare("SELECT key FROM fleet_keys WHERE name = 'fleet'"));
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
      conn_->Prepare("INSERT INTO fleet_keys (name, key) VALUES ('fleet', ?)"));
  put.BindBlob(1, key);
  SKERRY_RETURN_IF_ERROR(put.Run());
  SKERRY_RETURN_IF_ERROR(txn.Commit());
  return key;
}

}  // namespace skerry::store
