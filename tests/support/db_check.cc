#include "tests/support/db_check.h"

#include <sqlite3.h>

namespace skerry::testing {

std::vector<StoredGenome> ReadGenomes(const std::string& db, int64_t run_id) {
  std::vector<StoredGenome> out;
  sqlite3* conn = nullptr;
  if (sqlite3_open_v2(db.c_str(), &conn, SQLITE_OPEN_READONLY, nullptr) !=
      SQLITE_OK) {
    sqlite3_close(conn);
    return out;
  }
  sqlite3_busy_timeout(conn, 5000);
  sqlite3_stmt* s = nullptr;
  sqlite3_prepare_v2(
      conn,
      "SELECT id, run_id, island, generation, slot, origin, "
      "coalesce(parent_a, 0), coalesce(parent_b, 0), genes, "
      "score, eval_state, attempts FROM genomes WHERE run_id = ? "
      "ORDER BY island, generation, slot",
      -1, &s, nullptr);
  sqlite3_bind_int64(s, 1, run_id);
  while (sqlite3_step(s) == SQLITE_ROW) {
    StoredGenome g;
    g.id = sqlite3_column_int64(s, 0);
    g.run_id = sqlite3_column_int64(s, 1);
    g.island = sqlite3_column_int(s, 2);
    g.generation = sqlite3_column_int(s, 3);
    g.slot = sqlite3_column_int(s, 4);
    g.origin = sqlite3_column_int(s, 5);
    g.parent_a = sqlite3_column_int64(s, 6);
    g.parent_b = sqlite3_column_int64(s, 7);
    g.genes.assign(static_cast<const char*>(sqlite3_column_blob(s, 8)),
                   sqlite3_column_bytes(s, 8));
    g.has_score = sqlite3_column_type(s, 9) != SQLITE_NULL;
    g.score = sqlite3_column_double(s, 9);
    g.eval_state = sqlite3_column_int(s, 10);
    g.attempts = sqlite3_column_int(s, 11);
    out.push_back(std::move(g));
  }
  sqlite3_finalize(s);
  sqlite3_close(conn);
  return out;
}

std::string QueryText(const std::string& db, const std::string& sql) {
  std::string out;
  sqlite3* conn = nullptr;
  if (sqlite3_open_v2(db.c_str(), &conn, SQLITE_OPEN_READONLY, nullptr) ==
      SQLITE_OK) {
    sqlite3_busy_timeout(conn, 5000);
    sqlite3_stmt* s = nullptr;
    if (sqlite3_prepare_v2(conn, sql.c_str(), -1, &s, nullptr) == SQLITE_OK &&
        sqlite3_step(s) == SQLITE_ROW) {
      const unsigned char* t = sqlite3_column_text(s, 0);
      if (t != nullptr) out = reinterpret_cast<const char*>(t);
    }
    sqlite3_finalize(s);
  }
  sqlite3_close(conn);
  return out;
}

}  // namespace skerry::testing
