#include "server/store/read_pool.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"

namespace skerry::store {

ReadPool::~ReadPool() {
  std::vector<std::unique_ptr<Connection>> idle;
  {
    absl::MutexLock l(&mu_);
    idle.swap(idle_);
    open_.clear();
  }
}

absl::StatusOr<std::unique_ptr<Connection>> ReadPool::OpenOne() {
  SKERRY_ASSIGN_OR_RETURN(
      std::unique_ptr<Connection> conn,
      Connection::Open(path_, SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX,
                       options_.vfs));
  sqlite3_busy_timeout(conn->raw(), options_.busy_timeout_ms);
  SKERRY_RETURN_IF_ERROR(
      conn->Exec(absl::StrCat("PRAGMA cache_size = -", options_.cache_kib)));
  absl::MutexLock l(&mu_);
  open_.insert(conn->raw());
  return conn;
}

void ReadPool::Forget(sqlite3* db) {
  absl::MutexLock l(&mu_);
  open_.erase(db);
}

absl::StatusOr<ReadPool::Lease> ReadPool::Acquire() {
  std::unique_ptr<Connection> conn;
  std::function<void()> hook;
  {
    absl::MutexLock l(&mu_);
    if (!idle_.empty()) {
      conn = std::move(idle_.back());
      idle_.pop_back();
    }
    hook = snapshot_hook_;
  }
  if (conn == nullptr) {
    SKERRY_ASSIGN_OR_RETURN(conn, OpenOne());
  }
  // The snapshot is taken by the first read inside BEGIN, not by BEGIN.
  absl::Status s = conn->Exec("BEGIN");
  if (s.ok()) {
    absl::StatusOr<Statement> pin =
        conn->PrepareCached("SELECT version FROM schema_version");
    s = pin.ok() ? pin->Step().status() : pin.status();
  }
  if (!s.ok()) {
    if (!sqlite3_get_autocommit(conn->raw())) {
      conn->Exec("ROLLBACK").IgnoreError();
    }
    Forget(conn->raw());
    return absl::Status(s.code(),
                        absl::StrCat(path_, ": reading: ", s.message()));
  }
  if (hook) hook();
  return Lease(this, std::move(conn));
}

ReadPool::Lease::~Lease() {
  if (pool_ == nullptr || conn_ == nullptr) return;
  pool_->Return(std::move(conn_));
}

void ReadPool::Return(std::unique_ptr<Connection> conn) {
  // Ends the read transaction, so the snapshot no longer holds back
  // checkpoints; a connection that cannot end it is closed, not kept.
  bool reusable = conn->Exec("COMMIT").ok();
  if (!reusable && !sqlite3_get_autocommit(conn->raw())) {
    reusable = conn->Exec("ROLLBACK").ok();
  }
  absl::MutexLock l(&mu_);
  if (reusable && static_cast<int>(idle_.size()) < options_.max_idle) {
    idle_.push_back(std::move(conn));
    return;
  }
  open_.erase(conn->raw());
  conn.reset();
}

void ReadPool::Interrupt() {
  absl::MutexLock l(&mu_);
  for (sqlite3* db : open_) sqlite3_interrupt(db);
}

void ReadPool::SetSnapshotHookForTest(std::function<void()> hook) {
  absl::MutexLock l(&mu_);
  snapshot_hook_ = std::move(hook);
}

}  // namespace skerry::store
