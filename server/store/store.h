// The store: every run, island, genome and statistic in one SQLite file. The
// database is the truth; the coordinator's memory is a cache of it.
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
//        store_access.cc)
// Version 6 adds `sum` to runs, islands, genomes and generation_stats: a
// checksum of the row's other columns, kept by triggers (row_sums.h), checked
// on every read of those rows and by `--check`; and runs.request_id, the
// client's id of the SubmitRun that made the run, UNIQUE(owner, request_id).
//   genome_metrics(run_id, genome_id, name, value)       version 8:
//        an evaluator's named side measurements, at most 32 per genome
//        (common/metric_bounds.h), PRIMARY KEY (genome_id, name); methods in
//        metrics.cc
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
// (store.cc, SchemaV12), so the genome inserts and result updates that
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
// ## Commit points
// Each is one transaction; a change is acknowledged only after it.
//   CreateRun          the run, its islands, every island's generation 0 and
//                      its strategy state
//   CreateSeries       every run of a series as CreateRun does, and the
//                      series with its members
//   ExtendRun          an ended run's raised stop rule, its islands live
//                      again, the statistics of each newest generation
//                      dropped (recomputed when the engine breeds on), each
//                      island's strategy state for that generation
//   CommitResults      a batch of results (group commit of many Report
//                      calls), with the validation outcomes reported with them
//   CommitGeneration   one island's next generation whole: its genomes with
//                      their parent links, the island's generation number, the
//                      statistics of the generation just completed, the run's
//                      best so far, the validation request for that
//                      generation's champion, and the island's strategy
//                      state that produced the next generation
//   RequestValidation  a validation request for one genome (or the stored one)
//   CommitValidations  a batch of validation outcomes
//   SetRunState        pause, resume, stop, fail
//   FinishRun          final state, every island done, trimming of
//                      generations past the stop generation, the champion
//   CreateToken        a token, and its principal when new
//   RevokeToken        a token's revocation time and who revoked it
//   DeleteRun          an ended run's rows, all of them (run_delete.cc)
//   CreateFork         a fork: its run, islands, copied statistics and
//                      copied generation (fork_store.cc)
//   ImportRuns         every run of an exported file, ids remapped
//                      (run_transfer.cc)
//   BeginAudit         an audit row, before the change it describes is made
//   FinishAudit        the outcome of that change
//
// ## Pragmas
//   journal_mode=WAL   readers (the read pool's own connections) never block
//                      the writer, and one writer commit is one append to
//                      the log
//   synchronous=FULL   the WAL is synced at every commit: an acknowledged
//                      result survives power loss, not only a process crash.
//                      Group commit makes this cheap per result.
//                      CommitGeneration alone runs with synchronous=NORMAL:
//                      nobody is answered on it, it can be bred again from the
//                      generation before, and the WAL is synced in order, so
//                      the next synced commit (the first result of that
//                      generation, say) makes it durable too.
//   busy_timeout=5000  a backup or a second reader may hold a lock briefly
//   foreign_keys=OFF   parent links are checked by `--check`, not per insert
//   auto_vacuum=INCREMENTAL  set when a database is created (it cannot be
//                      set later without a VACUUM): DeleteRun gives the freed
//                      pages back with `PRAGMA incremental_vacuum`
//
// A database written by a newer schema than kSchemaVersion is refused, naming
// both versions; an older one is migrated forward in one transaction.
//
// Thread safety: every method may be called from any thread. Writes (and the
// reads not listed under "Reads" as pooled) are serialised by an internal
// mutex on the one writer connection; pooled reads run beside them.
#ifndef SKERRY_SERVER_STORE_STORE_H_
#define SKERRY_SERVER_STORE_STORE_H_

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/types/span.h"
#include "server/store/access_records.h"
#include "server/store/read_pool.h"
#include "server/store/records.h"
#include "server/store/replay.h"
#include "server/store/series_records.h"
#include "server/store/sqlite.h"
#include "skerry/v1/genome.pb.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/spec.pb.h"
#include "skerry/v1/validation.pb.h"

namespace skerry::store {

struct RunRecord {
  int64_t id = 0;
  std::string name;
  std::string owner;
  skerry::v1::RunSpec spec;
  std::string spec_text;
  skerry::v1::RunState state = skerry::v1::QUEUED;
  int32_t priority = 1;
  std::string message;
  int64_t created_ms = 0;
  int64_t updated_ms = 0;
  int64_t started_ms = 0;
  int64_t evaluations = 0;
  int64_t champion_id = 0;
  std::optional<double> best_score;
  std::optional<uint32_t> stop_generation;
  // The client's id of the SubmitRun that made it; empty when none was given.
  std::string request_id;
  // A fork's parent run and the generation it started from (fork_store.cc);
  // 0 for a run submitted anew.
  int64_t parent_run = 0;
  uint32_t parent_generation = 0;
  // Set by ListRuns when the stored row does not match its checksum or its
  // spec does not parse (DATA_LOSS naming the run); the fields may be wrong.
  absl::Status damage;
};

struct IslandRecord {
  int64_t run_id = 0;
  uint32_t index = 0;
  uint32_t generation = 0;
  bool done = false;
};

// One genome's evaluation outcome, or one failed attempt (state stays PENDING).
struct ResultUpdate {
  int64_t genome_id = 0;
  int64_t run_id = 0;
  skerry::v1::EvalState state = skerry::v1::EVALUATED;
  double score = 0.0;
  uint32_t attempts = 0;
  std::string error;
  double eval_seconds = 0.0;
  // The evaluator's named side measurements (EVALUATED only), already
  // bounded (common/metric_bounds.h); stored in genome_metrics.
  std::map<std::string, double> metrics;
};

// A held-out validation of one genome (validation.proto Validation).
struct ValidationRecord {
  int64_t id = 0;
  int64_t run_id = 0;
  int64_t genome_id = 0;
  uint32_t island = 0;  // the genome's natural key, read from genomes
  uint32_t generation = 0;
  uint32_t slot = 0;
  skerry::v1::ValidationReason reason = skerry::v1::REQUESTED;
  skerry::v1::ValidationState state = skerry::v1::VALIDATION_PENDING;
  double score = 0.0;
  uint32_t cases = 0;
  uint32_t attempts = 0;
  std::string error;
  std::string requested_by;
  int64_t requested_ms = 0;
  int64_t completed_ms = 0;
  int64_t copied_from = 0;
  // The genome's training outcome, read from genomes.
  skerry::v1::EvalState training_state = skerry::v1::PENDING;
  double training_score = 0.0;
  // The genome's genes: filled by PendingValidations only.
  std::vector<double> genes;
};

struct ValidationRequest {
  int64_t genome_id = 0;
  uint32_t cases = 0;
  skerry::v1::ValidationReason reason = skerry::v1::REQUESTED;
  std::string requested_by;
  int64_t now_ms = 0;
};

// One validation's outcome, or one failed attempt (state stays PENDING).
struct ValidationUpdate {
  int64_t id = 0;
  skerry::v1::ValidationState state = skerry::v1::VALIDATION_DONE;
  double score = 0.0;
  uint32_t attempts = 0;
  std::string error;
  int64_t now_ms = 0;
};

struct GenerationCommit {
  int64_t run_id = 0;
  uint32_t island = 0;
  StatsRecord completed;  // statistics of the generation just completed
  bool island_done = false;
  // The next generation (empty when the island is done). Ids are filled in.
  std::vector<GenomeRecord>* next = nullptr;
  // The run's best so far, when it changed.
  std::optional<std::pair<int64_t, double>> champion;
  // The new champion, with its genes, when it is a GA genome kept as its
  // recipe alone: it is kept whole from now on (a keyframe).
  const GenomeRecord* champion_genome = nullptr;
  // Set when this generation reached the target score: the run's stop
  // generation becomes the smaller of this and any stored one.
  std::optional<uint32_t> stop_generation;
  // Validate this genome (the completed generation's champion).
  std::optional<ValidationRequest> validate;
  // The island's strategy state after producing `next` (a serialised
  // StrategyState); unset: unchanged.
  std::optional<std::string> strategy_state;
};

struct WorkerRecord {
  int64_t id = 0;
  std::string name;
  std::string host;
  uint32_t threads = 0;
  std::string evaluators;  // comma-separated
  std::string version;
  int64_t joined_ms = 0;
  int64_t last_seen_ms = 0;
  std::string sandbox;  // JoinRequest.sandbox: "bwrap", "none: <reason>"
};

// What Store::Open and `--check` say of a 0-byte file.
inline constexpr const char* kEmptyFileMessage =
    "not a Skerry database: the file is empty (0 bytes). Only a file that does "
    "not exist yet becomes a new database; remove the empty file to start one";

class Store {
 public:
  static constexpr int kSchemaVersion = 13;

  // Opens the database at `path`, applies the pragmas and migrates an older
  // schema. Only a file that does not exist is created (and initialised); an
  // empty file or one without Skerry's schema is refused, unchanged
  // (FailedPrecondition), as is a newer schema.
  static absl::StatusOr<std::unique_ptr<Store>> Open(const std::string& path);
  struct Options {
    std::string vfs;  // SQLite VFS name of the writer; empty: the default
    int busy_timeout_ms = 5000;
    // The caller made the empty file itself a moment ago (OwnerLock does,
    // to lock it): initialise it as if it had been absent.
    bool initialise_empty_file = false;
    // `--read-only`: SQLITE_OPEN_READONLY, no pragma set, no migration. The
    // file must exist and be at this program's schema version exactly
    // (FailedPrecondition otherwise, naming both versions).
    bool read_only = false;
  };
  static absl::StatusOr<std::unique_ptr<Store>> Open(const std::string& path,
                                                     const Options& options);

  // A small write transaction (it bumps PRAGMA user_version, which Skerry does
  // not otherwise use): OK when the database can be written again (after a
  // full disk or an I/O error).
  absl::Status ProbeWrite();

  const std::string& path() const { return path_; }

  // Makes the statement running now, if any, fail soon (sqlite3_interrupt):
  // its transaction is rolled back. For a bounded shutdown; any thread, no
  // lock taken.
  void Interrupt() {
    sqlite3_interrupt(raw_);
    readers_->Interrupt();
  }

  // The read-only connections the reads run on (read_pool.h); tests hold a
  // read open across a commit through it.
  ReadPool* readers() { return readers_.get(); }

  // SQLite's quick_check (structure, no index contents), and the schema
  // (tables, indexes, triggers) compared with this version's: DATA_LOSS
  // naming the first findings. The whole file: `--check` and tests.
  absl::Status QuickCheck();
  // The coordinator's check at start: QuickCheck of every table but those
  // that grow with the evaluations (genomes, genome_metrics), and the
  // schema, so that a start does not read the whole file (1.8 GB at 10
  // million genomes). The whole file is checked next, while the coordinator
  // serves: FullCheckWhileServing.
  absl::Status QuickCheckAtStart();
  // The whole file's quick_check on a read connection of its own (the
  // writer goes on meanwhile, but the WAL is not checkpointed past the
  // check's snapshot until it ends): OK, DATA_LOSS naming the findings, or
  // CANCELLED after InterruptFullCheck.
  absl::Status FullCheckWhileServing();
  // Ends a FullCheckWhileServing running on another thread (soon).
  void InterruptFullCheck();
  // Nothing more is written to the file: every write transaction fails with
  // `why` (UNAVAILABLE, so the engine holds the fleet and says why in every
  // run summary, as for any storage trouble, never lifted by a probe).
  // Reads go on.
  void StopWrites(const absl::Status& why);

  // ---- Commit points ----
  // `strategy_states[i]`: island i's serialised StrategyState after seeding;
  // null or short: empty states.
  absl::Status CreateRun(
      RunRecord* run, std::vector<GenomeRecord>* genomes,
      const std::vector<std::string>* strategy_states = nullptr);
  // Results and validation outcomes reported together commit together.
  absl::Status CommitResults(
      absl::Span<const ResultUpdate> results,
      absl::Span<const ValidationUpdate> validations = {});
  absl::Status CommitGeneration(const GenerationCommit& commit);
  absl::Status SetRunState(int64_t run_id, skerry::v1::RunState state,
                           const std::string& message, int64_t now_ms);
  absl::Status SetRunStarted(int64_t run_id, int64_t now_ms);
  // NotFound names a missing run.
  absl::Status SetRunPriority(int64_t run_id, int32_t priority, int64_t now_ms);
  // Ends a run. With keep_through, generations after it are deleted (a faster
  // island may have bred past the stop generation). The champion is recomputed
  // from the genomes that remain. Every island of the run is marked done.
  absl::Status FinishRun(int64_t run_id, skerry::v1::RunState state,
                         const std::string& message,
                         std::optional<uint32_t> keep_through, int64_t now_ms);
  // Stores a pending validation of the genome and returns it, unless the
  // genome has one already (returned as stored). A genome carried over
  // unchanged (ELITE, MIGRANT) whose parent's validation is done gets a copy of
  // it (state DONE, copied_from set). NotFound names a missing genome.
  absl::StatusOr<ValidationRecord> RequestValidation(
      const ValidationRequest& request);
  absl::Status CommitValidations(absl::Span<const ValidationUpdate> updates);
  absl::StatusOr<int64_t> RegisterWorker(const WorkerRecord& worker);
  absl::Status TouchWorkers(absl::Span<const int64_t> ids, int64_t now_ms);
  // The fleet key (server/auth/fleet_seal.h): 32 random bytes, made and
  // committed at the first call, the same ever after (worker_list.cc).
  absl::StatusOr<std::string> FleetKey();

  // ---- Reads ----
  // ListRuns, GetRun, GetIslands, GetGeneration, GetGenome, GetStats,
  // BestGenome, FailedGenomes, CountFailed, RunDigest, GetGenomeMetrics,
  // MetricMeans and ChampionValidationScores run on the read
  // pool's connections (read_pool.h), each in one snapshot of the newest
  // commit: they never take the writer's mutex, so a long digest does not
  // delay a commit, and a commit does not wait for them.
  // Every run; a damaged run's record comes with `damage` set.
  absl::StatusOr<std::vector<RunRecord>> ListRuns();
  // Reads every row of the run the engine keeps in memory (the run, its
  // islands, statistics and strategy states, every island's newest
  // generation) and checks them: DATA_LOSS naming the first damage found.
  absl::Status VerifyActiveRun(int64_t run_id);
  // The run `owner` submitted with `request_id`, if any.
  absl::StatusOr<std::optional<int64_t>> FindRunByRequest(
      const std::string& owner, const std::string& request_id);
  // NotFound names the run.
  absl::StatusOr<RunRecord> GetRun(int64_t run_id);
  absl::StatusOr<std::vector<IslandRecord>> GetIslands(int64_t run_id);
  // Each island's stored strategy state (serialised StrategyState), by island.
  absl::StatusOr<std::map<uint32_t, std::string>> GetStrategyStates(
      int64_t run_id);
  // Which genes a generation is read with.
  enum class Genes {
    kAll,  // every genome's
    // Natural ES samples come as their recipes alone, with no genes
    // (records.h), as the engine holds them: rebuilding them costs a draw
    // per gene. GA genomes kept as recipes are rebuilt (replay.h).
    kNotSamples,
    // Only what is stored whole (the scores and links are wanted, not the
    // genes): nothing is rebuilt.
    kStored,
  };
  // A generation in slot order.
  absl::StatusOr<std::vector<GenomeRecord>> GetGeneration(
      int64_t run_id, uint32_t island, uint32_t generation,
      Genes genes = Genes::kAll);
  // NotFound names the genome. Genes::kStored: its genes only when stored
  // whole (nothing rebuilt), for a caller that wants its key or score.
  absl::StatusOr<GenomeRecord> GetGenome(int64_t genome_id,
                                         Genes genes = Genes::kAll);
  // Statistics in (island, generation) order; all islands when island is empty.
  absl::StatusOr<std::vector<StatsRecord>> GetStats(
      int64_t run_id, std::optional<uint32_t> island);
  // The best evaluated genome of a run; ties go to the earliest generation,
  // then the lowest island, then the lowest slot.
  absl::StatusOr<std::optional<GenomeRecord>> BestGenome(int64_t run_id);
  absl::StatusOr<int> CountWorkersSeenSince(int64_t since_ms);
  // A genome's evaluator metrics (metrics.cc); empty when it has none.
  absl::StatusOr<std::map<std::string, double>> GetGenomeMetrics(
      int64_t genome_id);
  // Migrants per (island, generation) that received them, by the island of
  // each migrant's parent (migrations.cc).
  absl::StatusOr<
      std::map<std::pair<uint32_t, uint32_t>, std::map<uint32_t, uint32_t>>>
  MigrationCounts(int64_t run_id);
  // Each metric's mean per (island, generation) over the run's genomes.
  absl::StatusOr<
      std::map<std::pair<uint32_t, uint32_t>, std::map<std::string, double>>>
  MetricMeans(int64_t run_id);
  // The `limit` workers seen last, newest first, with the sandbox column
  // when the schema has one (worker_list.cc).
  struct WorkerRow {
    WorkerRecord worker;
    std::optional<std::string> sandbox;
  };
  absl::StatusOr<std::vector<WorkerRow>> ListWorkers(int limit);
  // FAILED genomes of a run, newest first, at most `limit`; and how many.
  // Their genes only when stored whole (Genes::kStored): nothing is rebuilt
  // for a run's summary.
  absl::StatusOr<std::vector<GenomeRecord>> FailedGenomes(int64_t run_id,
                                                          int limit);
  absl::StatusOr<uint64_t> CountFailed(int64_t run_id);
  // The run digest documented with DigestResponse in runs.proto.
  struct Digest {
    std::string sha256;
    uint64_t genomes = 0;
  };
  absl::StatusOr<Digest> RunDigest(int64_t run_id);
  absl::StatusOr<int> SchemaVersion();

  // ---- Validations ----
  // Every pending validation, oldest first, genes filled.
  absl::StatusOr<std::vector<ValidationRecord>> PendingValidations();
  // The genome's validation, or nothing.
  absl::StatusOr<std::optional<ValidationRecord>> GetValidation(
      int64_t genome_id);
  // The validation scores of a run's generation champions, finished ones
  // only, keyed by (island, generation).
  absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>>
  ChampionValidationScores(int64_t run_id);
  // A run's validations, newest first, at most `limit`.
  absl::StatusOr<std::vector<ValidationRecord>> ListValidations(int64_t run_id,
                                                                int limit);

  // ---- Principals, tokens, audit (store_access.cc; schema version 5) ----
  // Creates the token's principal when it is new, then the token; fills in
  // token->id. AlreadyExists when the hash is already stored.
  absl::Status CreateToken(TokenRecord* token);
  // CreateToken for the first admin: FailedPrecondition, naming them, when a
  // live token of role admin exists already. One transaction.
  absl::Status CreateFirstAdmin(TokenRecord* token);
  // NotFound for no such token; FailedPrecondition when already revoked.
  absl::StatusOr<TokenRecord> RevokeToken(int64_t token_id,
                                          const std::string& by,
                                          int64_t now_ms);
  // Every token (live first when asked), by id.
  absl::StatusOr<std::vector<TokenRecord>> ListTokens();
  absl::StatusOr<int64_t> CountPrincipals();
  // Inserts `entry` (its code empty: not ended yet); returns its id.
  absl::StatusOr<int64_t> BeginAudit(const AuditRecord& entry);
  // Sets code, message, run_id and detail of the row entry.id.
  absl::Status FinishAudit(const AuditRecord& entry);
  absl::StatusOr<std::vector<AuditRecord>> QueryAudit(const AuditQuery& query);
  // The run's owner; empty when there is no such run.
  absl::StatusOr<std::optional<std::string>> RunOwner(int64_t run_id);

  // ---- Deleting runs (run_delete.cc) ----
  struct Deleted {
    uint64_t genomes = 0;
    uint64_t bytes_freed = 0;  // given back to the file system
  };
  // Deletes an ended run's rows (run, islands, genomes, statistics,
  // validations, metrics; audit rows stay), then runs an incremental vacuum.
  // NotFound for no such run; FailedPrecondition, changing nothing, while the
  // run is not ended or while forks of it exist (their lineage leads into
  // it), naming them. With `expected_content` (RunContentDigest,
  // run_content.h): FailedPrecondition, changing nothing, unless the run's
  // rows still have that digest (`skerry archive`).
  absl::StatusOr<Deleted> DeleteRun(
      int64_t run_id, const std::string& expected_content = std::string());

  // ---- Importing runs (run_transfer.cc) ----
  struct Imported {
    std::vector<std::pair<int64_t, int64_t>> runs;  // (id in the file, new id)
    uint64_t genomes = 0;
  };
  // Copies every run of the Skerry database `file` (a `skerry backup`) into
  // this one, with new ids for runs, genomes and validations and every link
  // between them remapped, in one transaction. Refused, changing nothing:
  // a file that is not a Skerry database, of another schema version (naming
  // both), damaged (quick_check, schema, row checksums), or holding a fork
  // without its parent run.
  absl::StatusOr<Imported> ImportRuns(const std::string& file);

  // ---- Forks (fork_store.cc) ----
  // Stores a fork: the run row (with run->parent_run and
  // run->parent_generation), its islands at that generation, the parent's
  // statistics of the generations before it (`stats`) and the copies of the
  // parent's genomes of that generation (`genomes`, parent links kept: they
  // name the parent's genomes), and each island's strategy state at that
  // generation (`strategy_states[i]`, serialised StrategyState). One
  // transaction. FailedPrecondition when the parent run is gone.
  absl::Status CreateFork(RunRecord* run, std::vector<StatsRecord>* stats,
                          std::vector<GenomeRecord>* genomes,
                          const std::vector<std::string>& strategy_states);
  // ---- Seed series and extension (series_store.cc; schema version 9) ----
  // Every run (ids filled in, genomes[i] its generation 0) and the series
  // (id and members filled in) in one transaction. AlreadyExists names a
  // series name in use.
  // `strategy_states[i]`: run i's as CreateRun takes them (null: empty).
  absl::Status CreateSeries(
      SeriesRecord* series, std::vector<RunRecord>* runs,
      std::vector<std::vector<GenomeRecord>>* genomes,
      const std::vector<std::vector<std::string>>* strategy_states = nullptr);
  // The series `owner` submitted with `request_id`, with its members.
  absl::StatusOr<std::optional<SeriesRecord>> FindSeriesByRequest(
      const std::string& owner, const std::string& request_id);
  // `base`, or `base`-2, -3... : the first name no series has.
  absl::StatusOr<std::string> UnusedSeriesName(const std::string& base);
  // Run id -> series name, for every run in a series. DATA_LOSS names a row
  // that does not match its checksum.
  absl::StatusOr<std::map<int64_t, std::string>> SeriesOfRuns();
  // The run's series name, or "" when it has none.
  absl::StatusOr<std::string> SeriesOfRun(int64_t run_id);
  // Stores `spec` (its raised stop rule) for an ended run and makes it RUNNING
  // again: islands live, stop generation cleared, the wall clock restarted
  // at now_ms, the statistics row of each island's newest generation deleted
  // so that the engine completes that generation again (its numbers come out
  // the same), and island i's strategy state replaced by states[i] (the one
  // that produced the generation the island is at). FailedPrecondition
  // unless the run is FINISHED or STOPPED.
  absl::Status ExtendRun(int64_t run_id, const skerry::v1::RunSpec& spec,
                         int64_t now_ms,
                         const std::vector<std::string>& states);

  // Gives every genome stored as a recipe (common/sample_recipe.h) its
  // genes, from its distribution genome: one of `genomes`, else read on
  // `conn` (the writer under mu_, or a reader's lease). DataLoss when that
  // genome is missing or not a distribution's.
  static absl::Status RebuildSamples(Connection* conn,
                                     std::vector<GenomeRecord>* genomes);
  // Gives every GA genome kept as its recipe its genes, replayed from its
  // ancestry read on `conn` (replay.h); `known`: genes already at hand.
  static absl::Status RebuildChildren(Connection* conn,
                                      std::vector<GenomeRecord>* genomes,
                                      const GeneCache* known = nullptr);
  // Rebuilds up to `sample` of the run's keyframes (GA genomes kept whole
  // with their recipe) from their recipes and ancestry, as if their genes
  // were not kept, and describes each one whose rebuilt genes differ from the
  // stored ones or that cannot be rebuilt (what `--check` reports). The
  // first keyframes in (generation, island, slot) order: their ancestry is
  // the shortest.
  static absl::StatusOr<std::vector<std::string>> CheckKeyframes(
      Connection* conn, int64_t run_id, int sample);

 private:
  Store(std::string path, std::unique_ptr<Connection> conn)
      : path_(std::move(path)), raw_(conn->raw()), conn_(std::move(conn)) {}
  // The schema version stored (0 for an empty file); refuses foreign, damaged
  // and newer databases without writing anything.
  absl::StatusOr<int> StoredVersion() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::StatusOr<Digest> RunDigestUnnamed(int64_t run_id);
  absl::Status Migrate(int from_version) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status CreateRunLocked(RunRecord* run,
                               std::vector<GenomeRecord>* genomes,
                               const std::vector<std::string>* strategy_states)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The run row, from `run` and the arguments (parent_run 0: not a fork);
  // sets run->id, parent_run, parent_generation and evaluations.
  absl::Status InsertRunRow(RunRecord* run, int64_t parent_run,
                            uint32_t parent_generation, int64_t evaluations)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The largest run id ever given: of a stored run, or named by a call that
  // succeeded in the audit log (a deleted or archived run's id stays there).
  // New runs take ids above it, so a run id is never given twice and the
  // audit log's entries about a run are about that run only. (Genome and
  // validation ids are never given twice either: see LargestIdLocked.)
  absl::StatusOr<int64_t> LargestRunIdLocked()
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The tables whose ids are never given twice (schema version 13).
  enum class IdTable { kRuns = 0, kGenomes = 1, kValidations = 2 };
  // The largest id `table` has ever given: its largest stored id or its
  // floor in id_floors, which RaiseIdFloorsLocked sets before rows are
  // deleted. New rows take ids above it.
  absl::StatusOr<int64_t> LargestIdLocked(IdTable table)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status RaiseIdFloorsLocked() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Island i's strategy_states row at `generation`: `states[i]`, or empty.
  absl::Status InsertStrategyStates(int64_t run_id, uint32_t count,
                                    uint32_t generation,
                                    const std::vector<std::string>* states)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::StatusOr<std::vector<std::pair<int64_t, uint64_t>>> SeriesMembersLocked(
      int64_t series_id) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status CommitGenerationLocked(const GenerationCommit& commit)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status InsertGenomes(std::vector<GenomeRecord>* genomes)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status InsertStats(const StatsRecord& stats)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // On the writer (under mu_) or a reader's lease.
  static absl::StatusOr<std::optional<GenomeRecord>> BestGenomeOn(
      Connection* conn, int64_t run_id);
  // The genomes `stmt` selects (GenomeColumns), read on `conn`, with the
  // genes `genes` says: natural ES samples rebuilt from their distribution
  // genomes (RebuildSamples), GA genomes kept as recipes from their
  // ancestry (RebuildChildren).
  static absl::StatusOr<std::vector<GenomeRecord>> QueryGenomes(
      Connection* conn, Statement* stmt, Genes genes = Genes::kAll);

  // A read transaction on a connection of the read pool (read_pool.h).
  absl::StatusOr<ReadPool::Lease> Reader() { return readers_->Acquire(); }
  absl::StatusOr<ValidationRecord> RequestValidationLocked(
      const ValidationRequest& request) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status InsertMetricsLocked(const ResultUpdate& r)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status ApplyValidationsLocked(
      absl::Span<const ValidationUpdate> updates)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::StatusOr<std::optional<ValidationRecord>> GetValidationLocked(
      int64_t genome_id) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::StatusOr<std::vector<ValidationRecord>> QueryValidations(
      Statement* stmt, bool with_genes) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  absl::Status InsertToken(TokenRecord* token)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  const std::string path_;
  sqlite3* const raw_;  // conn_'s, for Interrupt only
  absl::Mutex check_mu_;
  // The connection FullCheckWhileServing runs on, while it runs.
  sqlite3* checking_ ABSL_GUARDED_BY(check_mu_) = nullptr;
  bool check_interrupted_ ABSL_GUARDED_BY(check_mu_) = false;
  absl::Mutex mu_;
  std::unique_ptr<Connection> conn_ ABSL_GUARDED_BY(mu_);
  // Set once by Open, before the store is shared; the pooled reads under
  // "Reads" run on it, never on conn_. Declared after conn_ so that it is
  // closed first: the writer, closing last, checkpoints the WAL into the
  // database file and removes it (a read-only connection cannot).
  std::unique_ptr<ReadPool> readers_;
};

// SQL: `column` holds a GA genome's recipe (common/child_recipe.h), alone or
// with its genes (a keyframe): its first byte kChildRecipeTag, at least
// kChildRecipeBytes long.
std::string IsChildRecipeSql(absl::string_view column);

// DATA_LOSS naming the first object whose schema differs from a fresh
// database's of this version (Store::QuickCheck and `--check`).
absl::Status VerifySchema(Connection* conn);

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_STORE_H_
