// Consistent online copies of a database, or of one run, while the coordinator
// keeps writing.
//
// The copy is made on a connection of its own inside one read transaction, so
// it is one snapshot of the database as of a commit; in WAL mode that reader
// never blocks the writer (nor the writer it). A whole-database copy is VACUUM
// INTO; a one-run copy is a new database with the current schema into which the
// run's rows (run, islands, genomes, statistics) and the worker table are
// copied. Either file is a complete Skerry database: start a coordinator on it
// to restore.
//
// Thread safety: functions; each opens its own connection.
#ifndef SKERRY_SERVER_STORE_BACKUP_H_
#define SKERRY_SERVER_STORE_BACKUP_H_

#include <cstdint>
#include <string>

#include "absl/status/status.h"

namespace skerry::store {

// Writes the copy to `destination`, which must not exist yet. run_id 0 copies
// everything. NotFound for an unknown run.
absl::Status BackupDatabase(const std::string& source, int64_t run_id,
                            const std::string& destination);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_BACKUP_H_
