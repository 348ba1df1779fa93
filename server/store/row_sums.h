// Row checksums: what makes a flipped byte in a row's content visible.
//
// SQLite's `PRAGMA integrity_check` covers the file's structure (pages,
// b-trees, indexes), not what the rows say: a byte flipped inside a genome's
// genes or score leaves a well-formed file that answers wrongly. So every row
// of the tables a run's answers and digest depend on (runs, islands, genomes,
// generation_stats; strategy_states from version 10) carries `sum`: the first
// 8 bytes of a SHA-256 over every other column of the row, written in the same
// statement (and so the same transaction) as the row itself: by the statement,
// which computes it with skerry_row_sum() (the genome inserts and result
// updates, schema version 12), or else by triggers (schema version 6; since 12
// those of runs, islands, genomes and generation_stats fire only when the
// statement left the sum NULL or unchanged). Any reader can recompute it with
// the SQL function skerry_row_sum(), registered on every Connection
// (sqlite.cc), and compare.
//
// Invariant: for every row of those tables, sum = skerry_row_sum(<columns in
// the order of the k*SumColumns lists below>). The store checks it on every
// genome, run, island and statistics row it reads (a mismatch is DATA_LOSS
// naming run, island, generation and slot); `--check` checks every row.
//
// The hash does not depend on SQLite's storage class of a number (3 and 3.0
// hash alike) nor on TEXT against BLOB, so values bound with either type give
// the same sum as the stored, affinity-converted column.
//
// Writers other than Skerry (the sqlite3 shell) cannot change these tables:
// the triggers call skerry_row_sum, which only Skerry's connections know. That
// is deliberate: a hand edit is indistinguishable from damage.
//
// Thread safety: functions only; the SQL function keeps no state.
#ifndef SKERRY_SERVER_STORE_ROW_SUMS_H_
#define SKERRY_SERVER_STORE_ROW_SUMS_H_

#include <sqlite3.h>

#include <cstdint>
#include <string>

#include "absl/status/status.h"

namespace skerry::store {

// Column lists hashed per table, in order. Never reorder: stored sums depend
// on it. A new column is appended here and to the trigger in the migration
// that adds it.
inline constexpr const char* kRunSumColumns =
    "id, name, owner, spec, spec_text, seed, state, priority, message, "
    "created_ms, updated_ms, started_ms, parent_run, parent_generation, "
    "evaluations, champion_id, best_score, stop_generation, request_id";
inline constexpr const char* kIslandSumColumns =
    "run_id, idx, generation, done";
inline constexpr const char* kGenomeSumColumns =
    "id, run_id, island, generation, slot, origin, parent_a, parent_b, genes, "
    "score, eval_state, attempts, error, eval_seconds";
inline constexpr const char* kStatsSumColumns =
    "run_id, island, generation, best, mean, worst, diversity, evaluations, "
    "failed, eval_seconds, completed_ms";
// Schema version 10 (strategy_states), kept the same way.
inline constexpr const char* kStrategyStateSumColumns =
    "run_id, island, generation, state";

// SQL for a WHERE clause that verifies each genome row a query reads (the
// lineage queries use it): true when the row matches its sum, else the
// statement fails with SQLITE_CORRUPT and a message that starts with
// kDamagedRowMarker followed by DamagedGenome's message, which SqliteStatus
// (sqlite.cc) turns into exactly that DATA_LOSS. `G` qualifies the columns
// with the table alias "g.".
inline constexpr const char* kGenomeChecked =
    "skerry_genome_checked(sum, id, run_id, island, generation, slot, origin, "
    "parent_a, parent_b, genes, score, eval_state, attempts, error, "
    "eval_seconds)";
inline constexpr const char* kGenomeCheckedG =
    "skerry_genome_checked(g.sum, g.id, g.run_id, g.island, g.generation, "
    "g.slot, g.origin, g.parent_a, g.parent_b, g.genes, g.score, "
    "g.eval_state, g.attempts, g.error, g.eval_seconds)";
inline constexpr const char kDamagedRowMarker[] = "skerry damaged row: ";

// DATA_LOSS for a row whose content does not match its checksum, naming it
// and what to do.
absl::Status DamagedRun(int64_t run_id);
absl::Status DamagedGenome(int64_t run_id, uint32_t island, uint32_t generation,
                           uint32_t slot, int64_t genome_id);
// `what` names the row: "island 2", "island 2 generation 7 statistics".
absl::Status DamagedRow(int64_t run_id, const std::string& what);

// Selected after a table's columns: 1 when the row matches its checksum.
// `columns`: one of the k*SumColumns lists above.
std::string SumMatches(const char* columns);

// Registers skerry_row_sum(...) and skerry_genome_checked(...) on `db`.
// SQLITE_OK or SQLite's error code.
int RegisterRowSumFunction(sqlite3* db);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_ROW_SUMS_H_
