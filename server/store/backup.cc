#include "server/store/backup.h"

#include <unistd.h>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/check.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"

namespace skerry::store {

absl::Status BackupDatabase(const std::string& source, int64_t run_id,
                            const std::string& destination) {
  if (access(destination.c_str(), F_OK) == 0) {
    return absl::AlreadyExistsError(
        absl::StrCat(destination, " already exists; not overwritten"));
  }
  SKERRY_ASSIGN_OR_RETURN(auto conn,
                          Connection::Open(source, SQLITE_OPEN_READONLY));
  sqlite3_busy_timeout(conn->raw(), 5000);
  if (run_id == 0) {
    SKERRY_ASSIGN_OR_RETURN(Statement vac, conn->Prepare("VACUUM INTO ?"));
    vac.BindText(1, destination);
    SKERRY_RETURN_IF_ERROR(vac.Run());
    // The copy holds the rows' checksums as stored: check them there, so a
    // backup of damaged rows says so instead of passing for a good copy.
    SKERRY_ASSIGN_OR_RETURN(
        auto copy, Connection::Open(destination, SQLITE_OPEN_READONLY));
    absl::Status sums = VerifyRowSums(copy.get(), 0);
    if (!sums.ok()) unlink(destination.c_str());
    return sums;
  }
  {
    SKERRY_ASSIGN_OR_RETURN(Statement s,
                            conn->Prepare("SELECT 1 FROM runs WHERE id = ?"));
    s.BindInt(1, run_id);
    SKERRY_ASSIGN_OR_RETURN(bool row, s.Step());
    if (!row)
      return absl::NotFoundError(
          absl::StrCat("run ", static_cast<uint64_t>(run_id), " not found"));
  }
  {
    // A new, empty database with the current schema.
    SKERRY_ASSIGN_OR_RETURN(auto fresh, Store::Open(destination));
  }
  conn.reset();
  SKERRY_ASSIGN_OR_RETURN(conn,
                          Connection::Open(source, SQLITE_OPEN_READWRITE));
  sqlite3_busy_timeout(conn->raw(), 5000);
  SKERRY_ASSIGN_OR_RETURN(Statement attach, conn->Prepare("ATTACH ? AS dst"));
  attach.BindText(1, destination);
  SKERRY_RETURN_IF_ERROR(attach.Run());
  // One transaction: a single snapshot of the source, one commit of the copy.
  SKERRY_RETURN_IF_ERROR(conn->Exec("BEGIN"));
  // The copy's rows get fresh checksums as they are inserted, so the source's
  // are checked first, in the same snapshot: a damaged run is not copied.
  if (absl::Status sums = VerifyRowSums(conn.get(), run_id); !sums.ok()) {
    conn->Exec("ROLLBACK").IgnoreError();
    conn->Exec("DETACH dst").IgnoreError();
    unlink(destination.c_str());
    return sums;
  }
  for (const char* sql :
       {"INSERT INTO dst.runs SELECT * FROM main.runs WHERE id = ?1",
        "INSERT INTO dst.islands SELECT * FROM main.islands WHERE run_id = ?1",
        "INSERT INTO dst.genomes SELECT * FROM main.genomes WHERE run_id = ?1",
        "INSERT INTO dst.generation_stats SELECT * FROM main.generation_stats "
        "WHERE run_id = ?1",
        "INSERT INTO dst.validations SELECT * FROM main.validations "
        "WHERE run_id = ?1",
        "INSERT INTO dst.genome_metrics SELECT * FROM main.genome_metrics "
        "WHERE run_id = ?1",
        "INSERT INTO dst.strategy_states SELECT * FROM main.strategy_states "
        "WHERE run_id = ?1",
        "INSERT INTO dst.workers SELECT * FROM main.workers",
        // The run's audit trail goes with it; tokens and principals do not.
        "INSERT INTO dst.audit SELECT * FROM main.audit WHERE run_id = ?1"}) {
    SKERRY_ASSIGN_OR_RETURN(Statement st, conn->Prepare(sql));
    if (st.ParameterCount() > 0) st.BindInt(1, run_id);  // not workers'
    absl::Status s = st.Run();
    if (!s.ok()) {
      conn->Exec("ROLLBACK").IgnoreError();
      return s;
    }
  }
  SKERRY_RETURN_IF_ERROR(conn->Exec("COMMIT"));
  // Fold the copy's WAL into its main file, so the one file is the backup.
  SKERRY_RETURN_IF_ERROR(conn->Exec("PRAGMA dst.journal_mode=DELETE"));
  return conn->Exec("DETACH dst");
}

}  // namespace skerry::store
