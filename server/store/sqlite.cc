#include "server/store/sqlite.h"

#include <cstring>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "server/store/row_sums.h"

namespace skerry::store {
namespace {

// A write refused by PRAGMA query_only (SQLITE_READONLY) on a connection whose
// writes were stopped reports why (Connection::StopWrites), not "attempt to
// write a readonly database".
absl::Status WithStopReason(int rc, const absl::Status* writes_stopped,
                            absl::Status s) {
  if ((rc & 0xff) == SQLITE_READONLY && writes_stopped != nullptr &&
      !writes_stopped->ok()) {
    return *writes_stopped;
  }
  return s;
}

}  // namespace

absl::Status SqliteStatus(int rc, sqlite3* db, absl::string_view what) {
  if (rc == SQLITE_OK || rc == SQLITE_DONE || rc == SQLITE_ROW) {
    return absl::OkStatus();
  }
  const std::string msg =
      absl::StrCat(what, ": ", db != nullptr ? sqlite3_errmsg(db) : "", " (",
                   sqlite3_errstr(rc), ")");
  switch (rc & 0xff) {
    case SQLITE_BUSY:
    case SQLITE_LOCKED:
      return absl::UnavailableError(msg);
    case SQLITE_FULL:
      return absl::ResourceExhaustedError(msg);
    case SQLITE_IOERR:
    case SQLITE_CANTOPEN:
    // A file it may not write (permissions changed under it) is storage
    // trouble like a failing disk: the engine holds work until a write
    // succeeds, and an INTERNAL error (a bug) need not hold anything.
    case SQLITE_READONLY:
    case SQLITE_PERM:
      return absl::UnavailableError(msg);
    case SQLITE_CONSTRAINT:
      return absl::FailedPreconditionError(msg);
    case SQLITE_CORRUPT: {
      // A row that failed its checksum (row_sums.h): its own message alone,
      // which names the run, island, generation and slot.
      const absl::string_view err =
          db != nullptr ? sqlite3_errmsg(db) : absl::string_view();
      if (absl::StartsWith(err, kDamagedRowMarker)) {
        return absl::DataLossError(err.substr(strlen(kDamagedRowMarker)));
      }
      return absl::DataLossError(msg);
    }
    case SQLITE_NOTADB:
      return absl::DataLossError(msg);
    default:
      return absl::InternalError(msg);
  }
}

Statement& Statement::operator=(Statement&& other) noexcept {
  if (this != &other) {
    Release();
    db_ = other.db_;
    stmt_ = other.stmt_;
    writes_stopped_ = other.writes_stopped_;
    lent_flag_ = other.lent_flag_;
    bind_rc_ = other.bind_rc_;
    bind_index_ = other.bind_index_;
    other.stmt_ = nullptr;
    other.lent_flag_ = nullptr;
  }
  return *this;
}

Statement::~Statement() { Release(); }

void Statement::Release() {
  if (stmt_ == nullptr) return;
  if (lent_flag_ != nullptr) {
    sqlite3_reset(stmt_);
    sqlite3_clear_bindings(stmt_);
    *lent_flag_ = false;
  } else {
    sqlite3_finalize(stmt_);
  }
  stmt_ = nullptr;
  lent_flag_ = nullptr;
}

absl::StatusOr<bool> Statement::Step() {
  if (bind_rc_ != SQLITE_OK) {
    return SqliteStatus(bind_rc_, db_,
                        absl::StrCat("binding parameter ", bind_index_, " of ",
                                     sqlite3_sql(stmt_)));
  }
  const int rc = sqlite3_step(stmt_);
  if (rc == SQLITE_ROW) return true;
  if (rc == SQLITE_DONE) return false;
  absl::Status s = WithStopReason(rc, writes_stopped_,
                                  SqliteStatus(rc, db_, sqlite3_sql(stmt_)));
  sqlite3_reset(stmt_);
  return s;
}

absl::Status Statement::Run() {
  absl::StatusOr<bool> row = Step();
  if (!row.ok()) return row.status();
  Reset();
  return absl::OkStatus();
}

void Statement::Reset() {
  sqlite3_reset(stmt_);
  sqlite3_clear_bindings(stmt_);
  bind_rc_ = SQLITE_OK;
  bind_index_ = 0;
}

std::string Statement::ColumnText(int i) const {
  const unsigned char* p = sqlite3_column_text(stmt_, i);
  if (p == nullptr) return "";
  return std::string(reinterpret_cast<const char*>(p),
                     sqlite3_column_bytes(stmt_, i));
}

std::string Statement::ColumnBlob(int i) const {
  const void* p = sqlite3_column_blob(stmt_, i);
  if (p == nullptr) return "";
  return std::string(static_cast<const char*>(p),
                     sqlite3_column_bytes(stmt_, i));
}

absl::StatusOr<std::unique_ptr<Connection>> Connection::Open(
    const std::string& path, int flags, const std::string& vfs) {
  sqlite3* db = nullptr;
  const int rc = sqlite3_open_v2(path.c_str(), &db, flags,
                                 vfs.empty() ? nullptr : vfs.c_str());
  if (rc != SQLITE_OK) {
    absl::Status s = SqliteStatus(rc, db, absl::StrCat("opening ", path));
    sqlite3_close(db);
    return s;
  }
  sqlite3_extended_result_codes(db, 1);
  // Every connection can compute and check row checksums (row_sums.h).
  const int fn = RegisterRowSumFunction(db);
  if (fn != SQLITE_OK) {
    absl::Status s = SqliteStatus(fn, db, "registering skerry_row_sum");
    sqlite3_close(db);
    return s;
  }
  return std::unique_ptr<Connection>(new Connection(db));
}

Connection::~Connection() {
  for (auto& [sql, entry] : cache_) sqlite3_finalize(entry->stmt);
  sqlite3_close_v2(db_);
}

absl::Status Connection::Exec(absl::string_view sql) {
  const std::string s(sql);
  char* err = nullptr;
  const int rc = sqlite3_exec(db_, s.c_str(), nullptr, nullptr, &err);
  sqlite3_free(err);
  return WithStopReason(rc, &writes_stopped_,
                        SqliteStatus(rc, db_, s.substr(0, 60)));
}

absl::StatusOr<Statement> Connection::Prepare(absl::string_view sql) {
  sqlite3_stmt* stmt = nullptr;
  const int rc = sqlite3_prepare_v2(
      db_, sql.data(), static_cast<int>(sql.size()), &stmt, nullptr);
  if (rc != SQLITE_OK) {
    return SqliteStatus(rc, db_, absl::StrCat("preparing ", sql.substr(0, 60)));
  }
  return Statement(db_, stmt, &writes_stopped_);
}

absl::Status Connection::StopWrites(const absl::Status& why) {
  writes_stopped_ = why;
  return Exec("PRAGMA query_only = 1");
}

absl::StatusOr<Transaction> Transaction::Begin(Connection* conn) {
  if (!conn->writes_stopped().ok()) return conn->writes_stopped();
  absl::Status s = conn->Exec("BEGIN IMMEDIATE");
  if (!s.ok()) return s;
  return Transaction(conn);
}

Transaction::~Transaction() {
  if (!done_) conn_->Exec("ROLLBACK").IgnoreError();
}

absl::Status Transaction::Commit() {
  absl::Status s = conn_->Exec("COMMIT");
  if (!s.ok()) {
    // A failed COMMIT may leave the transaction open; roll it back so the
    // connection is usable and nothing half-written remains.
    if (!sqlite3_get_autocommit(conn_->raw())) {
      conn_->Exec("ROLLBACK").IgnoreError();
    }
  }
  done_ = true;
  return s;
}

}  // namespace skerry::store
