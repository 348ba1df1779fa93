// Runs: their rows, islands, per-generation statistics and strategy states,
// the seed series they belong to, and everything done to a run as a whole
// (create, commit a generation, pause, finish, extend, fork, delete, import).
// Tables runs, islands, generation_stats, strategy_states, series and
// series_runs (schema in store.h). A run's genomes are GenomeStore's; the
// commit points here write them through GenomeStore::Insert in their own
// transaction.
//
// ## Commit points
// Each is one transaction on the database's writer; a change is acknowledged
// only after it.
//   CreateRun          the run, its islands, every island's generation 0 and
//                      its strategy state
//   CreateSeries       every run of a series as CreateRun does, and the
//                      series with its members (series_store.cc)
//   ExtendRun          an ended run's raised stop rule, its islands live
//                      again, the statistics of each newest generation
//                      dropped (recomputed when the engine breeds on), each
//                      island's strategy state for that generation
//                      (series_store.cc)
//   CommitGeneration   one island's next generation whole: its genomes with
//                      their parent links, the island's generation number, the
//                      statistics of the generation just completed, the run's
//                      best so far (its genes kept whole when it is a GA
//                      genome kept as a recipe), the validation request for
//                      that generation's champion, and the island's strategy
//                      state that produced the next generation. Not synced
//                      (database.h, "Pragmas").
//   SetRunState        pause, resume, stop, fail
//   FinishRun          final state, every island done, trimming of
//                      generations past the stop generation, the champion
//   DeleteRun          an ended run's rows, all of them (run_delete.cc)
//   CreateFork         a fork: its run, islands, copied statistics and
//                      copied generation (fork_store.cc)
//   ImportRuns         every run of an exported file, ids remapped
//                      (run_transfer.cc)
//
// ## Reads
// ListRuns, GetRun, GetIslands, GetStats, GetStrategyStates and the series
// reads run on the read pool (read_pool.h), each in one snapshot of the
// newest commit. Every row read is checked against its checksum
// (row_sums.h): DATA_LOSS names the run and the row.
//
// Invariant: a run id is never given twice (Database::LargestRunId); an ended
// run has no live island; a run's evaluation counter counts its stored
// evaluations.
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_STORE_RUN_STORE_H_
#define SKERRY_SERVER_STORE_RUN_STORE_H_

#include <cstdint>
#include <map>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "server/store/database.h"
#include "server/store/records.h"
#include "server/store/series_records.h"
#include "skerry/v1/runs.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::store {

class RunStore {
 public:
  explicit RunStore(Database* db) : db_(db) {}

  // ---- Commit points ----
  // `strategy_states[i]`: island i's serialised StrategyState after seeding;
  // null or short: empty states.
  absl::Status CreateRun(
      RunRecord* run, std::vector<GenomeRecord>* genomes,
      const std::vector<std::string>* strategy_states = nullptr);
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

  // ---- Reads ----
  // Every run; a damaged run's record comes with `damage` set.
  absl::StatusOr<std::vector<RunRecord>> ListRuns();
  // The run `owner` submitted with `request_id`, if any.
  absl::StatusOr<std::optional<int64_t>> FindRunByRequest(
      const std::string& owner, const std::string& request_id);
  // NotFound names the run.
  absl::StatusOr<RunRecord> GetRun(int64_t run_id);
  absl::StatusOr<std::vector<IslandRecord>> GetIslands(int64_t run_id);
  // Each island's stored strategy state (serialised StrategyState), by island.
  absl::StatusOr<std::map<uint32_t, std::string>> GetStrategyStates(
      int64_t run_id);
  // Statistics in (island, generation) order; all islands when island is empty.
  absl::StatusOr<std::vector<StatsRecord>> GetStats(
      int64_t run_id, std::optional<uint32_t> island);

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

 private:
  static absl::Status CreateRunIn(
      Database::Writer& w, RunRecord* run, std::vector<GenomeRecord>* genomes,
      const std::vector<std::string>* strategy_states);
  static absl::Status CommitGenerationIn(Database::Writer& w,
                                         const GenerationCommit& commit);
  // The run row, from `run` and the arguments (parent_run 0: not a fork);
  // sets run->id, parent_run, parent_generation and evaluations.
  static absl::Status InsertRunRow(Database::Writer& w, RunRecord* run,
                                   int64_t parent_run,
                                   uint32_t parent_generation,
                                   int64_t evaluations);
  // Island i's strategy_states row at `generation`: `states[i]`, or empty.
  static absl::Status InsertStrategyStates(
      Database::Writer& w, int64_t run_id, uint32_t count, uint32_t generation,
      const std::vector<std::string>* states);
  static absl::Status InsertStats(Database::Writer& w,
                                  const StatsRecord& stats);
  static absl::StatusOr<std::vector<std::pair<int64_t, uint64_t>>>
  SeriesMembers(Connection* conn, int64_t series_id);

  Database* const db_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_RUN_STORE_H_
