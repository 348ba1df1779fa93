// The engine: drives every active run from the store's truth.
//
// It keeps, per active run and island, the current generation (being evaluated)
// and the last completed ones it may need for migration: a cache of the store
// that grows with the active populations, not with the stored history. On
// Open() it rebuilds that cache from the store alone, queues every pending
// genome again, and breeds any generation that was complete when the previous
// coordinator died.
//
// Each island's search is a Strategy (strategy.h): the engine asks it for
// generation 0, and for each completed generation tells it the scores and asks
// for the next; it never knows which strategy runs. What an island does next
// (breed, wait for migrants, finish, discard) is DecideIslandStep
// (island_step.h), a pure function of facts the engine gathers.
//
// Results arrive from any number of Report calls. They are grouped
// (group_commit.h): one committer thread takes every batch waiting, applies the
// lot in one transaction (GenomeStore::CommitResults), and only then answers
// the callers (a result is acknowledged only after it is committed). The
// engine's lock is not held while that transaction is written and synced: the
// results are claimed under it, committed without it, and kept in the cache
// under it again; reads (summaries, lists, watches) go on meanwhile, and every
// writer waits for the commit in flight (AwaitCommit), so nothing the commit
// relies on changes under it. Completed generations are then bred, each in a
// transaction of its own with the strategy's new state
// (RunStore::CommitGeneration); a failed commit restores the strategy to the
// state saved before it was told.
//
// Stop rules, all deterministic except wall time:
// - max_generations: an island stops after generation max_generations - 1.
// - max_evaluations: shared among islands in proportion to population; an
// island
//   stops at the first generation boundary where its own evaluations reach its
//   share.
// - target_score: the run's stop generation is the first generation at which
// any
//   island's best reaches the target; every island runs to it (or hits the
//   target earlier), and generations a faster island bred past it are
//   discarded.
// - max_wall_seconds: from the run's first start, an island stops at the first
//   generation boundary past the limit (its final generation is complete);
//   not reproducible.
// Whatever ends a run (these rules, a user's stop, a failure) marks every
// island done in the same transaction (RunStore::FinishRun). A run none of
// whose genomes was ever scored ends FAILED_RUN with the last error, not
// FINISHED.
//
// Migration (reproducible mode): the generation g+1 of an island at an epoch is
// bred only once every source island has completed generation g (a source that
// stopped before g sends nothing), so migrants never depend on timing. In
// asynchronous mode (islands.asynchronous) the island never waits: it takes
// emigrants from the newest generation <= g each source has completed so far,
// or none; the run is then not reproducible and its digest depends on the
// fleet.
//
// Held-out validation (common/validation.h, validation.proto): when a run's
// evaluator declares validation cases, the champion of each island's completed
// generation (or only a new best, per ValidationSpec.champions) gets a
// validation request in the same transaction as the generation, and any genome
// can be validated on request. Validations are tasks of their own kind in the
// same queue; they never feed back into the search (the digest and the genomes
// do not depend on them), and they outlive the run's search.
//
// Storage trouble (disk full, I/O error, a file it may not write): a failed
// commit changes nothing in the cache; the engine stops handing out work
// (TaskQueue::SetHeld), says why in every run summary and on stderr, keeps
// answering reads, probes the database every second of the engine's clock (the
// committer's tick), and resumes by itself when a write succeeds. Workers keep
// their results and report them again. Every write path goes through this, the
// fleet's Join included (NoteStorageTrouble). A probe that succeeds lifts the
// hold, and when the pass's own writes fail again at once (a lock taken
// between the probe and the work) the committer tries again at once, a few
// times, rather than a tick later.
//
// Only storage trouble (UNAVAILABLE, RESOURCE_EXHAUSTED from the store) holds
// the fleet. Any other failed write (INTERNAL, a constraint: a bug, or a value
// the store will not take) is logged and fails only what caused it: a batch of
// results is committed result by result and the one that fails alone is
// stored as a failed attempt naming the error; a run whose breeding fails so
// ends FAILED_RUN with the error; a call gets the error back.
//
// Damage is not storage trouble. A run whose rows fail their checksums
// (store/row_sums.h) or whose pages SQLite finds corrupt (DATA_LOSS) is marked
// damaged, in memory only (writing to a damaged file could spread the damage):
// its work stops, its summary says FAILED with the damage named, and the
// other runs go on. At Open, damaged runs are found by reading what the cache
// needs; later, by any read or commit of theirs that fails with DATA_LOSS.
// The damage stays until the run is restored (docs/operations.md).
//
// Thread safety: every public method may be called from any thread.
#ifndef SKERRY_SERVER_ENGINE_ENGINE_H_
#define SKERRY_SERVER_ENGINE_ENGINE_H_

#include <cstdint>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <thread>
#include <tuple>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "common/clock.h"
#include "server/engine/group_commit.h"
#include "server/engine/strategy.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/runs.pb.h"

namespace skerry::engine {

class Engine {
 public:
  static absl::StatusOr<std::unique_ptr<Engine>> Open(
      store::Store* store, scheduler::TaskQueue* queue, Clock* clock);
  // For `skerry-coordinator --read-only` (docs/operations.md): loads every run
  // to answer summaries, but queues no task, breeds nothing and starts no
  // committer, so it never writes. The coordinator refuses every call that
  // would reach a writing method (server/read_only.h).
  static absl::StatusOr<std::unique_ptr<Engine>> OpenReadOnly(
      store::Store* store, scheduler::TaskQueue* queue, Clock* clock);
  ~Engine();

  // Validates and stores a new run with generation 0 of every island, then
  // queues its tasks. InvalidArgument names the bad field. `priority` is the
  // run's share weight in the task queue, from scheduler::kMinWeight to
  // kMaxWeight; 0 means kMinWeight (docs/sharing.md). A non-empty
  // `request_id` is stored with the run (unique per owner: a second run with
  // the same pair is refused with FailedPrecondition).
  absl::StatusOr<store::RunRecord> Submit(skerry::v1::RunSpec spec,
                                          std::string spec_text,
                                          std::string owner,
                                          uint32_t priority = 0,
                                          std::string request_id = "");
  // Makes a fork of run `parent_id` (engine_fork.cc): a new run whose
  // islands start at `generation` from copies of the parent's genomes there
  // (server/engine/fork_spec.h says what `spec` may change; it comes
  // prepared). InvalidArgument names a field that may not change;
  // FailedPrecondition when the parent has not reached `generation` on every
  // island or no longer holds it; NotFound for no such parent. `priority` 0:
  // the parent's.
  absl::StatusOr<store::RunRecord> Fork(int64_t parent_id, uint32_t generation,
                                        skerry::v1::RunSpec spec,
                                        std::string spec_text,
                                        std::string owner, uint32_t priority,
                                        std::string request_id);
  // Deletes an ended (or damaged) run and everything stored of it
  // (engine_delete.cc; RunStore::DeleteRun says what is refused), and forgets
  // its queued validations.
  // `expected_content`: as RunStore::DeleteRun (`skerry archive`).
  absl::StatusOr<store::RunStore::Deleted> Delete(
      int64_t run_id, const std::string& expected_content = std::string());
  // Imports the runs of an export file (RunStore::ImportRuns) and loads those
  // that are active, as a restart would (engine_delete.cc).
  absl::StatusOr<store::RunStore::Imported> Import(const std::string& file);
  // A seed series (engine_series.cc): one run of `spec` per seed (the spec's
  // own seed replaced), all stored with the series in one transaction, or
  // none. `series` names it (RunStore::CreateSeries refuses a name in use);
  // members and ids are filled in.
  absl::StatusOr<std::vector<store::RunRecord>> SubmitSeries(
      skerry::v1::RunSpec spec, std::string spec_text,
      store::SeriesRecord* series, uint32_t priority = 0);
  // Raises an ended run's stop rule to `stop` and lets it go on
  // (engine_series.cc; study.proto ExtendRunRequest says what may change).
  // InvalidArgument names a field that would lower the rule;
  // FailedPrecondition a run that is not FINISHED or STOPPED, or one whose
  // strategy is not the GA (a CMA-ES state may be of a generation trimmed
  // at the finish).
  absl::Status Extend(int64_t run_id, const skerry::v1::StopSpec& stop);
  // Stores a run's new priority (1 to 1000, else InvalidArgument naming the
  // field) and gives the queue the new weight. Any run, ended ones too.
  absl::Status SetPriority(int64_t run_id, uint32_t priority);
  absl::Status Pause(int64_t run_id);
  absl::Status Resume(int64_t run_id);
  absl::Status Stop(int64_t run_id);

  // Hands results to the committer and blocks until they are committed (or the
  // commit failed: Unavailable, retry later).
  absl::StatusOr<ReportOutcome> Report(
      int64_t worker_id, const std::vector<skerry::v1::TaskResult>& results);

  // Stores (or finds) a validation of the genome and queues it.
  // FailedPrecondition when its run declares no validation cases; NotFound
  // for an unknown genome.
  absl::StatusOr<store::ValidationRecord> RequestValidation(
      int64_t genome_id, const std::string& requested_by);

  // The run as the user API shows it.
  absl::StatusOr<skerry::v1::RunSummary> Summary(int64_t run_id);
  // Why work is held because the database cannot be written; "" when writes
  // succeed.
  std::string StorageProblem();
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> ListSummaries();

  // A counter that grows whenever any run changes; waits until it exceeds
  // `seen` or `deadline` passes (real time), and returns its value.
  uint64_t WaitForChange(uint64_t seen, absl::Time deadline);

  // A write outside the engine (the fleet's Join, say) failed: storage
  // trouble is held and shown as if a commit had failed; other codes pass.
  void NoteStorageTrouble(const absl::Status& s) ABSL_LOCKS_EXCLUDED(mu_);

  // Stops the committer after the batch in flight. Report calls made later
  // fail. Idempotent; any thread.
  void Shutdown();

 private:
  struct Island {
    uint32_t index = 0;
    uint32_t generation = 0;
    bool done = false;
    bool waiting = false;      // bred only when migration sources are ready
    uint64_t evaluations = 0;  // cumulative, for the evaluation budget
    std::vector<store::GenomeRecord> current;
    std::map<uint32_t, std::vector<store::GenomeRecord>> completed;  // last few
    std::map<int64_t, uint32_t> pending;  // genome id -> slot
    std::optional<store::StatsRecord> last_stats;
    // Made at Submit or restored at Open; saved with every generation.
    std::unique_ptr<Strategy> strategy;
  };
  struct Run {
    store::RunRecord record;
    std::shared_ptr<const skerry::v1::EvaluatorSpec> evaluator;
    std::vector<Island> islands;
    std::optional<uint32_t> stop_generation;  // set by the target score rule
    std::string finish_reason;
    std::string last_error;  // of the latest failed genome, for the message
    // The champion's (generation, island, slot), read back at load: an equal
    // score takes the championship only with a smaller key, so the champion
    // is the same whichever island's generation commits first.
    std::optional<std::tuple<uint32_t, uint32_t, uint32_t>> champion_key;
  };
  // A queued validation: what its results are checked against.
  struct PendingValidation {
    int64_t run_id = 0;
    uint32_t max_attempts = 1;
  };

  Engine(store::Store* store, scheduler::TaskQueue* queue, Clock* clock,
         bool read_only = false)
      : store_(store), queue_(queue), clock_(clock), read_only_(read_only) {}

  // Pause and resume: moves an active run from `from` to `to`.
  absl::Status Transition(int64_t run_id, skerry::v1::RunState from,
                          skerry::v1::RunState to, const char* verb)
      ABSL_LOCKS_EXCLUDED(mu_);
  static absl::Status CheckPriority(uint32_t priority);
  // Takes a run just stored by CreateRun into the cache and queues its
  // generation 0.
  void Activate(const store::RunRecord& rec,
                std::vector<store::GenomeRecord> genomes,
                std::vector<std::unique_ptr<Strategy>> strategies)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Generation 0 of every island from its strategy, the strategies, and
  // their states after it (as CreateRun stores them). A pure function of the
  // spec: called before the lock is taken.
  static absl::Status SeedIslands(
      const skerry::v1::RunSpec& prepared,
      std::vector<store::GenomeRecord>* genomes,
      std::vector<std::unique_ptr<Strategy>>* strategies,
      std::vector<std::string>* states);
  absl::Status Load() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status LoadRun(const store::RunRecord& record)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The group commit's callbacks (group_commit.h), on its thread.
  void ApplyReports(absl::Span<ReportJob* const> jobs,
                    const std::function<void()>& answer)
      ABSL_LOCKS_EXCLUDED(mu_);
  void Idle() ABSL_LOCKS_EXCLUDED(mu_);
  // One pass of Idle: lifts the hold when a probe write succeeds, then breeds
  // what failed writes left undone. True when this pass lifted the hold and
  // its own writes set it again (a write failed between the probe and the
  // work, as a busy lock does): worth another pass at once.
  bool IdlePass() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // A claimed result of a report batch, on its way to the store. It names
  // its island by index and generation, not by pointer: the run may be
  // dropped (found damaged) while the commit is written without the lock.
  struct AppliedResult {
    size_t job;  // its report's index in the batch
    const skerry::v1::TaskResult* result;
    uint32_t island;
    uint32_t generation;
    uint32_t slot;
    uint32_t max_attempts;  // the run's
    store::ResultUpdate update;
  };
  struct ValidatedResult {
    size_t job;
    const skerry::v1::TaskResult* result;
    scheduler::TaskInfo info;
  };
  // ApplyReports in three steps: claims the batch's results under the lock,
  // commits them without it, and keeps what was committed under it again.
  void ClaimResults(absl::Span<ReportJob* const> jobs,
                    std::vector<AppliedResult>* applied,
                    std::vector<int64_t>* claimed,
                    std::vector<store::ValidationUpdate>* validated,
                    std::vector<ValidatedResult>* validated_from,
                    std::vector<ReportOutcome>* outcomes)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void KeepCommitted(const std::vector<AppliedResult>& applied,
                     const std::vector<store::ValidationUpdate>& validated)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Every method that writes the store or changes a run waits here first, so
  // that nothing a result commit in flight relies on changes under it.
  void AwaitCommit() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The batch's commit failed for a reason that is neither the storage's nor
  // damage (a bug, or a result the store will not hold: engine_salvage.cc).
  // Commits each result alone instead, under the lock (a rare path); one that
  // fails alone is stored as a failed attempt naming the error, and one that
  // cannot be stored even so is refused (in `outcomes`) and queued again. On
  // return `applied` and `validated` hold what was committed; the rest is
  // unclaimed.
  void SalvageBatch(std::vector<AppliedResult>* applied,
                    std::vector<store::ValidationUpdate>* validated,
                    std::vector<ValidatedResult>* validated_from,
                    std::vector<ReportOutcome>* outcomes)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Breeds or finishes every island of the run whose generation is complete.
  absl::Status Advance(Run& run) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // One step for one island; returns true when something changed.
  absl::StatusOr<bool> AdvanceIsland(Run& run, Island& island)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Generation `generation` of island `source`, complete, or nullptr when not
  // ready yet; `skip` is set when the source finished before it.
  absl::StatusOr<const std::vector<store::GenomeRecord>*> CompletedGeneration(
      Run& run, uint32_t source, uint32_t generation, bool* skip)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::Status FinishRun(Run& run, skerry::v1::RunState state,
                         const std::string& message)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void QueueIsland(const Run& run, const Island& island)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // ---- Validations (engine_validation.cc) ----
  // Queues every pending validation of the store (at Open).
  absl::Status LoadValidations() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void QueueValidation(const store::ValidationRecord& v,
                       const std::vector<double>& genes,
                       const skerry::v1::RunSpec& spec)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The request for the champion of `generation` (best score `best`) when the
  // run's policy wants one; new_best: it improves the run's best.
  std::optional<store::ValidationRequest> ChampionValidation(
      const Run& run, const std::vector<store::GenomeRecord>& generation,
      double best, bool new_best) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // After the generation committed: queues its champion's validation when
  // the store left it pending. `genes`: g's (SampleGenes).
  void QueueChampionValidation(const Run& run, const store::GenomeRecord& g,
                               const std::vector<double>& genes)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The error text stored for a failed attempt, bounded in size.
  static std::string FailureText(const skerry::v1::TaskResult& result);
  // The stored outcome of a claimed validation result.
  store::ValidationUpdate ValidationOutcome(
      const scheduler::TaskInfo& info, const skerry::v1::TaskResult& result,
      bool failed) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  bool WallTimeIsUp(const Run& run) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void FailRun(Run& run, const absl::Status& why)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  absl::StatusOr<skerry::v1::RunSummary> SummaryLocked(int64_t run_id)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void NotifyChange() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Stops the run's work and remembers why (see "Damage" above). `record`:
  // what is known of the run when it is not active.
  void MarkDamaged(int64_t run_id, const absl::Status& why,
                   const store::RunRecord* record = nullptr)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // A commit for run `run_id` failed: damage marks it, storage trouble holds
  // the work (NoteWriteFailure), and anything else (a bug: retrying will not
  // fix it) fails that run alone with the error, so that it neither stops the
  // fleet nor repeats every tick.
  void NoteRunWriteFailure(int64_t run_id, const absl::Status& s)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // A write failed for a reason of the storage (UNAVAILABLE: busy, I/O
  // error, a file it may not write; RESOURCE_EXHAUSTED: a full disk): stop
  // handing out work until ProbeWrite succeeds. Any other error (INTERNAL: a
  // bug) is logged and holds nothing: the caller fails or skips its work.
  void NoteWriteFailure(const absl::Status& s)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Called by the committer: clears the problem once a probe write succeeds.
  void RetryWrites() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // UNAVAILABLE or RESOURCE_EXHAUSTED: the storage's trouble, which holds.
  static bool IsStorageTrouble(const absl::Status& s);
  // Idle passes run at once, at most, before waiting for the next tick.
  static constexpr int kImmediatePasses = 4;

  // Constant after construction.
  store::Store* const store_;
  scheduler::TaskQueue* const queue_;
  Clock* const clock_;
  const bool read_only_;  // OpenReadOnly: never queue, breed or write

  absl::Mutex mu_;
  std::map<int64_t, std::unique_ptr<Run>> runs_ ABSL_GUARDED_BY(mu_);  // active
  // Queued validations by validation id.
  std::map<int64_t, PendingValidation> validations_ ABSL_GUARDED_BY(mu_);
  uint64_t changes_ ABSL_GUARDED_BY(mu_) = 0;
  absl::Status write_problem_ ABSL_GUARDED_BY(mu_);  // OK: writes succeed
  struct Damaged {
    store::RunRecord record;
    absl::Status why;
  };
  std::map<int64_t, Damaged> damaged_ ABSL_GUARDED_BY(mu_);
  // A result commit is being written without mu_ (ApplyReports).
  bool committing_ ABSL_GUARDED_BY(mu_) = false;

  std::unique_ptr<GroupCommit> committer_;
};

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_ENGINE_H_
