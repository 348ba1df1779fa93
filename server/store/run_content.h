// The content digest of one run: a SHA-256 over every row stored of it (the
// run row, islands, genomes, statistics, validations, metrics, strategy
// states; not its audit entries, which keep growing, nor the worker table),
// each row hashed column by column with its type, the row hashes sorted so
// that the order rows come in does not matter. The same rows in two files
// (the coordinator's database and a one-run export of it, whose ids are the
// same) give the same digest; any changed, added or removed row another.
//
// `skerry archive` uses it: the run is deleted only while its rows still have
// the digest of the export the caller wrote (RunService.ArchiveRun).
//
// Thread safety: functions; the connection is the caller's, used by one
// thread at a time.
#ifndef SKERRY_SERVER_STORE_RUN_CONTENT_H_
#define SKERRY_SERVER_STORE_RUN_CONTENT_H_

#include <cstdint>
#include <string>

#include "absl/status/statusor.h"
#include "server/store/sqlite.h"

namespace skerry::store {

// Hex SHA-256 of run `run_id`'s rows on `conn`; NotFound for no such run.
absl::StatusOr<std::string> RunContentDigest(Connection* conn, int64_t run_id);

// The same, read from the database file `file` (an export, say).
absl::StatusOr<std::string> RunContentDigestOfFile(const std::string& file,
                                                   int64_t run_id);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_RUN_CONTENT_H_
