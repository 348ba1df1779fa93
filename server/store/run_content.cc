// RunContentDigest (run_content.h).
#include "server/store/run_content.h"

#include <algorithm>
#include <cstring>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/sha256.h"
#include "common/status_macros.h"

namespace skerry::store {

absl::StatusOr<std::string> RunContentDigest(Connection* conn, int64_t run_id) {
  // Table name and the column holding the run's id; "runs" first.
  static constexpr const char* kTables[][2] = {
      {"runs", "id"},
      {"islands", "run_id"},
      {"genomes", "run_id"},
      {"generation_stats", "run_id"},
      {"validations", "run_id"},
      {"genome_metrics", "run_id"},
      {"strategy_states", "run_id"},
  };
  Sha256 all;
  for (const auto& [table, key] : kTables) {
    SKERRY_ASSIGN_OR_RETURN(
        Statement q, conn->Prepare(absl::StrCat("SELECT * FROM ", table,
                                                " WHERE ", key, " = ?1")));
    q.BindInt(1, run_id);
    std::vector<std::string> rows;
    while (true) {
      SKERRY_ASSIGN_OR_RETURN(bool row, q.Step());
      if (!row) break;
      Sha256 h;
      for (int i = 0; i < q.ColumnCount(); ++i) {
        const int type = q.ColumnType(i);
        h.UpdateU32(static_cast<uint32_t>(type));
        if (type == SQLITE_INTEGER) {
          h.UpdateU64(static_cast<uint64_t>(q.ColumnInt(i)));
        } else if (type == SQLITE_FLOAT) {
          const double v = q.ColumnDouble(i);
          uint64_t bits = 0;
          std::memcpy(&bits, &v, sizeof bits);
          h.UpdateU64(bits);
        } else if (type != SQLITE_NULL) {
          const std::string bytes = q.ColumnBlob(i);
          h.UpdateU64(bytes.size());
          h.Update(bytes);
        }
      }
      rows.push_back(h.FinishHex());
    }
    if (rows.empty() && std::strcmp(table, "runs") == 0) {
      return absl::NotFoundError(absl::StrCat("run ", run_id, " not found"));
    }
    std::sort(rows.begin(), rows.end());
    all.Update(table);
    all.UpdateU64(rows.size());
    for (const std::string& r : rows) all.Update(r);
  }
  return all.FinishHex();
}

absl::StatusOr<std::string> RunContentDigestOfFile(const std::string& file,
                                                   int64_t run_id) {
  SKERRY_ASSIGN_OR_RETURN(auto conn,
                          Connection::Open(file, SQLITE_OPEN_READONLY));
  return RunContentDigest(conn.get(), run_id);
}

}  // namespace skerry::store
