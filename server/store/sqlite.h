// Thin RAII helpers over the SQLite C API: a connection, prepared statements,
// and turning SQLite result codes into absl::Status where they enter our code.
//
// Status codes are chosen by what the caller should do:
//   SQLITE_BUSY / SQLITE_LOCKED     -> Unavailable (retry the transaction)
//   SQLITE_IOERR_* / SQLITE_CANTOPEN -> Unavailable (the write failed, nothing
//                                      was committed; retry when the disk is
//                                      back)
//   SQLITE_FULL                     -> ResourceExhausted (free space, then
//   retry) SQLITE_CONSTRAINT               -> FailedPrecondition SQLITE_CORRUPT
//   / SQLITE_NOTADB  -> DataLoss anything else                   -> Internal
//
// Every sqlite3_bind_* result is checked: the first failed binding (say
// SQLITE_TOOBIG or SQLITE_RANGE) is kept and returned by the next Step() or
// Run(), which then runs nothing, so a statement never runs with a parameter
// silently left NULL.
//
// Connection::PrepareCached keeps statements prepared once per connection
// (sqlite3_prepare_v3 with SQLITE_PREPARE_PERSISTENT; statement_cache.cc) and
// lends them out: the Statement it returns resets and clears the cached one
// when it goes away instead of finalising it, so its read transaction ends
// with it.
//
// Thread safety: none. The owner (Database) serialises access with its own
// mutex (Database::Writer); each read-pool connection has one user at a time.
#ifndef SKERRY_SERVER_STORE_SQLITE_H_
#define SKERRY_SERVER_STORE_SQLITE_H_

#include <sqlite3.h>

#include <cstdint>
#include <map>
#include <memory>
#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace skerry::store {

// Maps a SQLite result code, with the connection's message, to a Status.
absl::Status SqliteStatus(int rc, sqlite3* db, absl::string_view what);

class Statement {
 public:
  Statement() = default;
  // `writes_stopped`: the connection's StopWrites reason, reported instead
  // of SQLite's when the statement is refused as a write.
  Statement(sqlite3* db, sqlite3_stmt* stmt,
            const absl::Status* writes_stopped = nullptr)
      : db_(db), stmt_(stmt), writes_stopped_(writes_stopped) {}
  Statement(Statement&& other) noexcept { *this = std::move(other); }
  Statement& operator=(Statement&& other) noexcept;
  Statement(const Statement&) = delete;
  Statement& operator=(const Statement&) = delete;
  ~Statement();

  // Binding is 1-based, as in SQLite. A failure is kept for Step()/Run().
  void BindInt(int i, int64_t v) { Check(i, sqlite3_bind_int64(stmt_, i, v)); }
  void BindDouble(int i, double v) {
    Check(i, sqlite3_bind_double(stmt_, i, v));
  }
  void BindNull(int i) { Check(i, sqlite3_bind_null(stmt_, i)); }
  void BindText(int i, absl::string_view v) {
    Check(i, sqlite3_bind_text64(stmt_, i, v.data(), v.size(), SQLITE_TRANSIENT,
                                 SQLITE_UTF8));
  }
  void BindBlob(int i, absl::string_view v) {
    Check(i,
          sqlite3_bind_blob64(stmt_, i, v.data(), v.size(), SQLITE_TRANSIENT));
  }
  // Binds NULL when v == 0 (used for optional foreign keys).
  void BindIdOrNull(int i, int64_t v) {
    if (v == 0) {
      BindNull(i);
    } else {
      BindInt(i, v);
    }
  }

  // Steps once. Returns true when a row is ready, false when done; the kept
  // binding failure, if any, without stepping.
  absl::StatusOr<bool> Step();
  // Steps to completion, expecting no rows.
  absl::Status Run();
  // Ready for reuse with new bindings (forgets a binding failure).
  void Reset();

  int ColumnCount() const { return sqlite3_column_count(stmt_); }
  int ParameterCount() const { return sqlite3_bind_parameter_count(stmt_); }
  int64_t ColumnInt(int i) const { return sqlite3_column_int64(stmt_, i); }
  double ColumnDouble(int i) const { return sqlite3_column_double(stmt_, i); }
  int ColumnType(int i) const { return sqlite3_column_type(stmt_, i); }
  bool ColumnIsNull(int i) const {
    return sqlite3_column_type(stmt_, i) == SQLITE_NULL;
  }
  std::string ColumnText(int i) const;
  std::string ColumnBlob(int i) const;

 private:
  friend class Connection;
  void Check(int i, int rc) {
    if (rc != SQLITE_OK && bind_rc_ == SQLITE_OK) {
      bind_rc_ = rc;
      bind_index_ = i;
    }
  }
  // Finalises an owned statement; resets and hands back a lent one.
  void Release();

  sqlite3* db_ = nullptr;
  sqlite3_stmt* stmt_ = nullptr;
  const absl::Status* writes_stopped_ = nullptr;  // its Connection's
  // Set for a statement lent by PrepareCached: the cache's in-use flag.
  bool* lent_flag_ = nullptr;
  int bind_rc_ = SQLITE_OK;
  int bind_index_ = 0;
};

class Connection {
 public:
  static absl::StatusOr<std::unique_ptr<Connection>> Open(
      const std::string& path, int flags, const std::string& vfs = "");
  ~Connection();

  sqlite3* raw() const { return db_; }
  // Runs one or more statements without results.
  absl::Status Exec(absl::string_view sql);
  absl::StatusOr<Statement> Prepare(absl::string_view sql);
  // The statement for `sql` from this connection's cache, prepared on first
  // use (statement_cache.cc). While one is lent, the same text asked again
  // (a nested use) gets a fresh, uncached statement.
  absl::StatusOr<Statement> PrepareCached(absl::string_view sql);
  int64_t LastInsertId() const { return sqlite3_last_insert_rowid(db_); }
  int Changes() const { return sqlite3_changes(db_); }
  // From now on nothing is written through this connection: PRAGMA
  // query_only (which SQLite checks as each statement runs, cached ones
  // included) and Transaction::Begin returning `why`. For a file found
  // damaged while it is served (Database::StopWrites).
  absl::Status StopWrites(const absl::Status& why);
  const absl::Status& writes_stopped() const { return writes_stopped_; }

 private:
  struct CachedStatement {
    sqlite3_stmt* stmt = nullptr;
    bool lent = false;
  };
  explicit Connection(sqlite3* db) : db_(db) {}
  sqlite3* db_;
  absl::Status writes_stopped_;  // StopWrites' reason; OK while writes go on
  // Finalised before the connection closes; entries never move (unique_ptr),
  // so a lent Statement's flag stays valid while the connection lives.
  std::map<std::string, std::unique_ptr<CachedStatement>, std::less<>> cache_;
};

// BEGIN IMMEDIATE ... COMMIT, rolled back on destruction unless committed.
class Transaction {
 public:
  static absl::StatusOr<Transaction> Begin(Connection* conn);
  Transaction(Transaction&& other) noexcept
      : conn_(other.conn_), done_(other.done_) {
    other.done_ = true;
  }
  Transaction(const Transaction&) = delete;
  Transaction& operator=(const Transaction&) = delete;
  ~Transaction();
  absl::Status Commit();

 private:
  explicit Transaction(Connection* conn) : conn_(conn) {}
  Connection* conn_;
  bool done_ = false;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_SQLITE_H_
