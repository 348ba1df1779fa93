// Importing runs exported from another coordinator (`skerry backup RUN --to
// FILE`, or `all`) into a coordinator's database, offline: what
// `skerry-coordinator --import FILE --db DB` does. RunStore::ImportRuns
// (run_store.h, run_transfer.cc) says what is checked and how ids are remapped.
//
// Thread safety: a function; it takes the database's owner lock, so it fails
// while a coordinator serves the database.
#ifndef SKERRY_SERVER_STORE_RUN_TRANSFER_H_
#define SKERRY_SERVER_STORE_RUN_TRANSFER_H_

#include <string>

#include "absl/status/statusor.h"
#include "server/store/store.h"

namespace skerry::store {

// Opens (or creates) `db_path` as a coordinator would, with its owner lock,
// and imports every run of `file`. The text is what the command prints.
absl::StatusOr<std::string> ImportIntoDatabase(const std::string& db_path,
                                               const std::string& file);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_RUN_TRANSFER_H_
