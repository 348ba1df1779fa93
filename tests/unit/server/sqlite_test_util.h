// Helpers for tests that look at a SQLite file from outside the store: raw
// connections of the test's own, the file's bytes, readable status messages.
//
// Thread safety: each helper opens and closes its own connection.
#ifndef SKERRY_TESTS_UNIT_SERVER_SQLITE_TEST_UTIL_H_
#define SKERRY_TESTS_UNIT_SERVER_SQLITE_TEST_UTIL_H_

#include <sqlite3.h>

#include <fstream>
#include <iterator>
#include <string>

#include "absl/status/status.h"
#include "gtest/gtest.h"

namespace skerry::testing {

// The message as a std::string, so that a failed match prints it readably.
inline std::string Message(const absl::Status& s) {
  return std::string(s.message());
}

inline std::string ReadFileBytes(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  return std::string(std::istreambuf_iterator<char>(in),
                     std::istreambuf_iterator<char>());
}

// SQL that takes a database back from schema version 6 to version 5 (its
// checksum triggers, index and columns; SQLite 3.35+ drops columns), for
// tests that build an older database from a current one.
inline constexpr char kUndoVersion6[] =
    "DROP TRIGGER runs_sum_insert; DROP TRIGGER runs_sum_update; "
    "DROP TRIGGER islands_sum_insert; DROP TRIGGER islands_sum_update; "
    "DROP TRIGGER genomes_sum_insert; DROP TRIGGER genomes_sum_update; "
    "DROP TRIGGER generation_stats_sum_insert; "
    "DROP TRIGGER generation_stats_sum_update; DROP INDEX runs_request; "
    "ALTER TABLE runs DROP COLUMN sum; ALTER TABLE runs DROP COLUMN "
    "request_id; ALTER TABLE islands DROP COLUMN sum; ALTER TABLE genomes DROP "
    "COLUMN sum; ALTER TABLE generation_stats DROP COLUMN sum; ";

// SQL that takes a database back from schema version 10 to version 9 (the
// strategy states; their checksum triggers go with the table).
inline constexpr char kUndoVersion10[] = "DROP TABLE strategy_states; ";

// SQL that takes a database back from schema version 11 to version 10 (the
// fleet key of worker secrets and lease proofs).
inline constexpr char kUndoVersion11[] = "DROP TABLE fleet_keys; ";

// SQL that takes a database of the current schema (Database::kSchemaVersion,
// 13) back to schema version `version` (1 to 13), each version's undo in turn
// from the newest down, and sets the stored version: for tests that build
// an older database from a current one and open it to migrate it forward.
// Version 12 changed only how row sums are written, so it has nothing to
// undo. Append the new version's undo here when a migration is added.
inline std::string UndoSchemaTo(int version) {
  const char* const undo[] = {
      /* 13 (id floors) */ "DROP TABLE id_floors; ",
      /* 12 */ "",
      /* 11 */ kUndoVersion11,
      /* 10 */ kUndoVersion10,
      /* 9 (seed series) */ "DROP TABLE series; DROP TABLE series_runs; ",
      /* 8 (metrics) */ "DROP TABLE genome_metrics; ",
      /* 7 (sandbox) */ "ALTER TABLE workers DROP COLUMN sandbox; ",
      /* 6 */ kUndoVersion6,
      /* 5 (access) */
      "DROP TABLE principals; DROP TABLE tokens; DROP TABLE audit; ",
      /* 4 */ "DROP TABLE validations; ",
      /* 3 */ "DROP INDEX genomes_failed; ",
      /* 2 */ "DROP INDEX genomes_parent_a; DROP INDEX genomes_parent_b; ",
  };
  std::string sql;
  for (int v = 13; v > version && v >= 2; --v) sql += undo[13 - v];
  sql +=
      "UPDATE schema_version SET version = " + std::to_string(version) + "; ";
  return sql;
}

// Runs SQL on a raw connection of our own (not the store's).
inline void RawExec(const std::string& path, const std::string& sql) {
  sqlite3* db = nullptr;
  ASSERT_EQ(sqlite3_open(path.c_str(), &db), SQLITE_OK);
  char* err = nullptr;
  const int rc = sqlite3_exec(db, sql.c_str(), nullptr, nullptr, &err);
  EXPECT_EQ(rc, SQLITE_OK) << (err != nullptr ? err : "") << " in " << sql;
  sqlite3_free(err);
  sqlite3_close(db);
}

// The first column of the first row of `sql`, as text ("" when no row).
inline std::string RawQuery(sqlite3* db, const std::string& sql) {
  sqlite3_stmt* stmt = nullptr;
  EXPECT_EQ(sqlite3_prepare_v2(db, sql.c_str(), -1, &stmt, nullptr), SQLITE_OK)
      << sqlite3_errmsg(db);
  std::string out;
  if (sqlite3_step(stmt) == SQLITE_ROW) {
    const unsigned char* t = sqlite3_column_text(stmt, 0);
    if (t != nullptr) out = reinterpret_cast<const char*>(t);
  }
  sqlite3_finalize(stmt);
  return out;
}

inline std::string RawQuery(const std::string& path, const std::string& sql) {
  sqlite3* db = nullptr;
  EXPECT_EQ(sqlite3_open(path.c_str(), &db), SQLITE_OK);
  std::string out = RawQuery(db, sql);
  sqlite3_close(db);
  return out;
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_UNIT_SERVER_SQLITE_TEST_UTIL_H_
