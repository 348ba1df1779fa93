// The connection pool and reference resolution. The queries are in
// streams.cc (ancestors, descendants), coalescence.cc, descent.cc (line of
// descent, attribution) and common_ancestor.cc.
#include "server/lineage/lineage_reader.h"

#include <utility>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/lineage/node_sql.h"

namespace skerry::lineage {

using skerry::v1::LineageNode;

const char* LineageReader::DescentRule() {
  return "through the fitter parent: a scored parent beats a failed one, the "
         "better score under the run's objective wins, ties and single-parent "
         "genomes go to parent a; the line ends at generation 0 or at an "
         "immigrant";
}

absl::StatusOr<std::unique_ptr<LineageReader>> LineageReader::Open(
    const std::string& db_path, ReaderOptions options) {
  std::unique_ptr<LineageReader> reader(new LineageReader(db_path, options));
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::Connection> conn,
                          reader->Connect());
  SKERRY_ASSIGN_OR_RETURN(
      store::Statement probe,
      conn->Prepare("SELECT count(*) FROM sqlite_master WHERE type = 'table' "
                    "AND name = 'genomes'"));
  SKERRY_ASSIGN_OR_RETURN(bool row, probe.Step());
  if (!row || probe.ColumnInt(0) == 0) {
    return absl::FailedPreconditionError(
        absl::StrCat(db_path, ": not a Skerry database (no genomes table)"));
  }
  probe = store::Statement();
  reader->GiveBack(conn.release());
  return reader;
}

absl::StatusOr<std::unique_ptr<store::Connection>> LineageReader::Connect() {
  absl::StatusOr<std::unique_ptr<store::Connection>> conn =
      store::Connection::Open(path_,
                              SQLITE_OPEN_READONLY | SQLITE_OPEN_NOMUTEX);
  if (!conn.ok()) {
    return absl::Status(
        conn.status().code(),
        absl::StrCat("lineage reader: ", conn.status().message()));
  }
  sqlite3_busy_timeout((*conn)->raw(), 5000);
  SKERRY_RETURN_IF_ERROR((*conn)->Exec(
      absl::StrCat("PRAGMA cache_size=-", options_.cache_kib,
                   "; PRAGMA query_only=1; PRAGMA temp_store=FILE")));
  return conn;
}

absl::StatusOr<LineageReader::Pooled> LineageReader::Borrow() {
  store::Connection* conn = nullptr;
  {
    absl::MutexLock l(&mu_);
    if (!idle_.empty()) {
      conn = idle_.back().release();
      idle_.pop_back();
    }
  }
  if (conn == nullptr) {
    SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<store::Connection> fresh,
                            Connect());
    conn = fresh.release();
  }
  return Pooled(conn, [this](store::Connection* c) { GiveBack(c); });
}

void LineageReader::GiveBack(store::Connection* conn) {
  std::unique_ptr<store::Connection> owned(conn);
  // A connection left inside a transaction (an error mid-query) is dropped.
  if (!sqlite3_get_autocommit(conn->raw())) return;
  absl::MutexLock l(&mu_);
  if (static_cast<int>(idle_.size()) < options_.max_idle_connections) {
    idle_.push_back(std::move(owned));
  }
}

absl::StatusOr<LineageNode> LineageReader::Resolve(
    const skerry::v1::GenomeRef& ref) {
  SKERRY_ASSIGN_OR_RETURN(Pooled conn, Borrow());
  return internal::ResolveRef(conn.get(), ref);
}

}  // namespace skerry::lineage
