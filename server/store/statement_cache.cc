// Connection::PrepareCached: statements prepared once per connection and lent
// out (sqlite.h). The store's hot paths (a generation's genome inserts, a
// group commit's result updates) and every read on the read pool's
// connections run the same few statements thousands of times; preparing each
// anew cost a parse and a plan per call.
//
// SQLITE_PREPARE_PERSISTENT tells SQLite the statement is long-lived, so it
// takes its memory from the heap rather than the lookaside slots meant for
// short-lived statements (sqlite.org/c3ref/c_prepare_normalize.html).
#include "absl/strings/str_cat.h"
#include "server/store/sqlite.h"

namespace skerry::store {

absl::StatusOr<Statement> Connection::PrepareCached(absl::string_view sql) {
  auto it = cache_.find(sql);
  if (it == cache_.end()) {
    sqlite3_stmt* stmt = nullptr;
    const int rc =
        sqlite3_prepare_v3(db_, sql.data(), static_cast<int>(sql.size()),
                           SQLITE_PREPARE_PERSISTENT, &stmt, nullptr);
    if (rc != SQLITE_OK) {
      return SqliteStatus(rc, db_,
                          absl::StrCat("preparing ", sql.substr(0, 60)));
    }
    auto entry = std::make_unique<CachedStatement>();
    entry->stmt = stmt;
    it = cache_.emplace(std::string(sql), std::move(entry)).first;
  }
  CachedStatement& entry = *it->second;
  // A nested use of the same text (a reader calling a helper that reads the
  // same way) must not share one cursor: it gets a statement of its own.
  if (entry.lent) return Prepare(sql);
  entry.lent = true;
  Statement lent(db_, entry.stmt, &writes_stopped_);
  lent.lent_flag_ = &entry.lent;
  return lent;
}

}  // namespace skerry::store
