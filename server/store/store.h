// The store: every run, island, genome and statistic in one SQLite file. The
// database is the truth; the coordinator's memory is a cache of it.
//
// A Store owns one Database (database.h: the file, its writer and its
// readers) and one store per concern over it, each with its own header
// contract (commit points, reads, invariants):
//   runs()         RunStore, run_store.h: runs, islands, statistics,
//                  strategy states, series; create, generation commit,
//                  finish, extend, fork, delete, import
//   genomes()      GenomeStore, genome_store.h: genomes, results, metrics,
//                  genomes kept as recipes, the run digest
//   validations()  ValidationStore, validation_store.h
//   access()       AccessStore, access_store.h: principals, tokens, audit
//   fleet()        FleetStore, fleet_store.h: workers and the fleet key
// A commit point of one store that writes another's rows (CreateRun writes
// generation 0) does so through that store's functions taking a
// Database::Writer, in one transaction.
//
// ## Schema (version 12)
//   schema_version(version)                      one row
//   runs(id, name, owner, spec BLOB, spec_text, seed, state, priority, message,
//        created_ms, updated_ms, started_ms, parent_run, parent_generation,
//        evaluations, champion_id, best_score, stop_generation)
//   islands(run_id, idx, generation, done)       generation = newest created
//   genomes(id, run_id, island, generation, slot, origin, parent_a, parent_b,
//           genes BLOB, score, eval_state, attempts, error, eval_seconds)
//           UNIQUE(run_id, island, generation, slot)  -- the natural key
//   generation_stats(run_id, island, generation, best, mean, worst, diversity,
//           evaluations, failed, eval_seconds, completed_ms)
//   workers(id, name, host, threads, evaluators, version, joined_ms,
//           last_seen_ms, sandbox)                 sandbox: version 7
//   validations(id, run_id, genome_id UNIQUE, generation, reason, state,
//           score, cases, attempts, error, requested_by, requested_ms,
//           completed_ms, copied_from)              (version 4)
//   principals(name, created_ms, created_by)            version 5, with
//   tokens(id, principal, role, hash, note, created_ms, created_by,
//          revoked_ms, revoked_by)
//   audit(id, at_ms, principal, role, token_id, method, run_id, peer, code,
//         message, detail)
//        (columns and rules in server/store/access_schema.h; methods in
//        access_store.h)
// Version 6 adds `sum` to runs, islands, genomes and generation_stats: a
// checksum of the row's other columns, kept by triggers (row_sums.h), checked
// on every read of those rows and by `--check`; and runs.request_id, the
// client's id of the SubmitRun that made the run, UNIQUE(owner, request_id).
//   genome_metrics(run_id, genome_id, name, value)       version 8:
//        an evaluator's named side measurements, at most 32 per genome
//        (common/metric_bounds.h), PRIMARY KEY (genome_id, name); methods in
//        genome_store.h (metrics.cc)
//   series(id, name UNIQUE, owner, created_ms, request_id, sum)  version 9:
//   series_runs(run_id PRIMARY KEY, series_id, position, seed, sum)
//        seed series (study.proto SubmitSeries), with checksums as in
//        version 6; schema and methods in series_store.{h,cc}
//   strategy_states(run_id, island, generation, state BLOB, sum)  version 10
//        PRIMARY KEY (run_id, island): the island's search strategy as it
//        was when it produced `generation` (a serialised StrategyState,
//        proto/skerry/v1/strategy.proto), with its row checksum kept and
//        checked like those of version 6. A migrated database gets an empty
//        state per island (a GA's, which keeps nothing).
//   fleet_keys(name PRIMARY KEY, key BLOB)              version 11: the key
//        of worker secrets and lease proofs (server/auth/fleet_seal.h); a
//        copy of the database carries it, so a restored coordinator still
//        knows its workers
// Version 12 changes only the checksum triggers of runs, islands, genomes
// and generation_stats: they write the sum when the statement did not
// (database.cc, SchemaV12), so the genome inserts and result updates that
// compute it themselves write each row once.
// Indexes: the natural key; pending genomes per run (restart); parent_a and
// parent_b (version 2: descendant queries); failed genomes per run (version 3);
// validations per run and pending validations (version 4); tokens per
// principal, audit per run and per principal (version 5).
// A validation's `state` and `reason` are the enum numbers of
// proto/skerry/v1/validation.proto; `generation` repeats the genome's, so
// trimming a run past its stop generation trims its validations too.
// `runs.owner` is the name of the principal that submitted the run ("local"
// when access control is off).
// `spec` is the normalised RunSpec in binary protobuf; `genes` is packed
// little-endian float64 (common/genes.h); `state`, `origin` and `eval_state`
// are the enum numbers of proto/skerry/v1. `attempts` counts evaluation
// attempts made; genomes carried over unchanged (elites, migrants) have 0 and
// were not evaluated. A genome's selection fitness is not stored: it is derived
// from the scores of its generation whenever the engine breeds.
//
// Thread safety: every method of every store may be called from any thread
// (database.h says how writes are serialised and reads run beside them).
#ifndef SKERRY_SERVER_STORE_STORE_H_
#define SKERRY_SERVER_STORE_STORE_H_

#include <cstdint>
#include <memory>
#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "server/store/access_store.h"
#include "server/store/database.h"
#include "server/store/fleet_store.h"
#include "server/store/genome_store.h"
#include "server/store/records.h"
#include "server/store/run_store.h"
#include "server/store/validation_store.h"

namespace skerry::store {

class Store {
 public:
  static constexpr int kSchemaVersion = Database::kSchemaVersion;
  using Options = Database::Options;

  // Database::Open, then the stores over it.
  static absl::StatusOr<std::unique_ptr<Store>> Open(const std::string& path);
  static absl::StatusOr<std::unique_ptr<Store>> Open(const std::string& path,
                                                     const Options& options);
  Store(const Store&) = delete;
  Store& operator=(const Store&) = delete;

  Database& db() { return *db_; }
  RunStore& runs() { return runs_; }
  GenomeStore& genomes() { return genomes_; }
  ValidationStore& validations() { return validations_; }
  AccessStore& access() { return access_; }
  FleetStore& fleet() { return fleet_; }

  // Reads every row of the run the engine keeps in memory (the run, its
  // islands, statistics and strategy states, every island's newest
  // generation) and checks them: DATA_LOSS naming the first damage found.
  absl::Status VerifyActiveRun(int64_t run_id);

 private:
  explicit Store(std::unique_ptr<Database> db)
      : db_(std::move(db)),
        runs_(db_.get()),
        genomes_(db_.get()),
        validations_(db_.get()),
        access_(db_.get()),
        fleet_(db_.get()) {}

  const std::unique_ptr<Database> db_;
  RunStore runs_;
  GenomeStore genomes_;
  ValidationStore validations_;
  AccessStore access_;
  FleetStore fleet_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_STORE_H_
