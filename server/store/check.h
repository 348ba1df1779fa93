// `skerry-coordinator --check DB`: SQLite's own integrity check plus the
// project's invariants, read-only, safe while a coordinator runs (WAL readers
// see one consistent snapshot and never block the writer).
//
// Invariants checked, per run:
//   - every island's generations 0..current exist, each with exactly its
//     population of genomes (a generation is written whole or not at all);
//   - every generation before the current one is complete (no PENDING genome),
//     and so is the current one of a finished or stopped island;
//   - every parent link resolves to a genome of the same run, of an earlier
//     generation (the previous one, in reproducible mode);
//   - elites and migrants have a parent; seeded genomes and immigrants have
//   none;
//   - each completed generation has its statistics row (but the last one of
//     a run that failed: the failure may have stopped it before they were
//     written, as an internal error while breeding does);
//   - the run's evaluation counter equals the evaluations stored;
//   - every island has a strategy state that parses, of the island's current
//     generation while the island still searches;
//   - every island of a finished, stopped or failed run is marked done.
//   - every row of runs, islands, genomes and generation_stats matches its
//     checksum (row_sums.h): changed genes, scores, parents... show here;
//   - an evaluated genome has a score, a failed one its error text;
//   - an elite or migrant has its parent's genes, and, when it was not
//     evaluated again, its parent's outcome.
//
// The file rule is Store::Open's: a missing or empty (0-byte) file is not a
// Skerry database, and neither is one without its schema.
//
// Thread safety: a function; opens its own connection.
#ifndef SKERRY_SERVER_STORE_CHECK_H_
#define SKERRY_SERVER_STORE_CHECK_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "server/store/sqlite.h"

namespace skerry::store {

struct CheckReport {
  std::string integrity;              // "ok" or SQLite's findings
  std::vector<std::string> problems;  // empty when every invariant holds
  // Findings that break no invariant but deserve a look: run names longer
  // than the name budget (stored before it existed; answers cut them,
  // common/quote.h AnsweredName). They do not make ok() false.
  std::vector<std::string> warnings;
  int runs = 0;
  long long genomes = 0;
  bool ok() const { return integrity == "ok" && problems.empty(); }
  std::string ToString() const;
};

// Fails only when the file cannot be read as a Skerry database at all.
// `max_name_bytes`: the name budget (--max-name-bytes) warned about.
absl::StatusOr<CheckReport> CheckDatabase(const std::string& path,
                                          uint64_t max_name_bytes = 256);

// Every row of runs, islands, genomes and generation_stats (of `run_id`, or of
// every run when 0) in database `schema` ("main", or an attached name)
// against its checksum: DATA_LOSS naming the first damaged row. Used by
// backups, before a copy is trusted.
absl::Status VerifyRowSums(Connection* conn, int64_t run_id,
                           const std::string& schema = "main");

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_CHECK_H_
