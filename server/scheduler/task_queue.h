// The task queue: every genome waiting for an evaluation, the leases held on
// them, and the fair hand-out of tasks across runs.
//
// A task is in one of three states:
//   queued      waiting for a worker
//   leased      handed to a worker until its deadline; renewed by the worker's
//               Report; an expired lease goes back to the front of the queue
//   claimed     a result for it is being committed; nothing else may claim it
// Complete() removes a task once its result is committed; Unclaim() puts it
// back when the commit failed.
//
// Result rule (invariant 5 of DESIGN.md; docs/safety.md says why): a result is
// taken only from a worker the task was leased to. A successful result is
// accepted while its task is queued or leased when the attempt it quotes was
// leased to the worker reporting it: the current lease, or an earlier one of
// the same task (a late result). An evaluation is a pure function of (genes,
// evaluation seed), so a late result from an expired lease is the same number
// the next worker would compute, and taking it saves that work. A result for
// an attempt that was never leased to the reporting worker (another worker's
// lease, an attempt never handed out, a task never leased) is refused with
// PermissionDenied: a worker can score only what it was given. The last
// kMaxHoldersKept leases of a task are remembered; a result from an older one
// is refused the same way. This memory dies with the process: a lease an
// earlier coordinator process made is known again through NoteLease, called
// by FleetService for a result whose lease proof (server/auth/fleet_seal.h,
// keyed by the database) shows that lease was made. A failed
// attempt counts only when it comes from the current lease (holder and
// attempt), so a stale worker cannot fail a genome. A result for a task that
// is unknown, claimed or completed changes nothing.
//
// Fair share (docs/sharing.md is the user's account): tasks are handed out by
// start-time fair queuing across runs (Goyal, Vin & Cheng 1996, "Start-time
// Fair Queuing", SIGCOMM '96; from memory). Every run has a weight W in
// [kMinWeight, kMaxWeight] (its priority) and a virtual time V, the virtual
// start of its next task. Each task is taken from the ready run with the
// smallest V (ties: the smaller run id), and that run's V grows by
// kVirtualUnit / W. So:
// - Proportional: two runs that stay ready get tasks in the ratio of their
//   weights; after any hand-out, |n_a / W_a - n_b / W_b| <= 1/W_a + 1/W_b
//   (tasks counted since both were ready), whatever their populations. A
//   run with a huge population cannot starve a small one.
// - Work conserving: a run with nothing queued, paused, or not yet added
//   takes no turn; the ready runs share everything between them.
// - No saved-up credit: when a run becomes ready again (its queue goes from
//   empty to non-empty, or it is resumed) its V becomes max(V, virtual now),
//   where virtual now is the V at which the last task was handed out. Time
//   spent idle, paused or held is not turned into a burst afterwards.
// - A weight change applies from the next task on; V is kept.
// A "ready" run is one that is not paused and has a queued task; while the
// whole queue is held nothing is handed out and no V moves. The share is
// counted in tasks, not in worker seconds: runs whose evaluations cost more
// get more worker time per task. Cost: O(runs) per task handed out.
//
// Split among workers (issue 14, the fleet's tail): a lease takes at most the
// asking worker's share, T x a / A rounded up, less what it already holds,
// and at least one task. T counts the queued tasks of ready runs plus the
// tasks the asking workers hold; a is what the worker asks for (max_tasks,
// which follows its threads) and A the sum of what every worker that asked
// within the last lease period asks for. This is guided self-scheduling
// (Polychronopoulos & Kuck 1987, "Guided self-scheduling: a practical
// scheduling scheme for parallel supercomputers", IEEE Trans. Computers;
// from memory), weighted by capacity and by what each worker holds: the
// first worker to ask for a generation no longer takes all of it while the
// others wait, a worker asking after it gets the rest of its share, and as
// the generation drains the chunks shrink, so the workers finish it within
// about one evaluation of each other. A lone worker still gets up to
// everything it asks for. A worker that stops asking leaves the split after
// one lease period; until then what it holds counts as its share.
//
// Two kinds of task share the queue (fleet.proto TaskKind): evaluations of
// genomes, keyed by genome id, and held-out validations, keyed by
// kValidationTaskBase + validation id. Every method taking ids takes these task
// ids. Validations outlive the search: RemoveRun drops a run's evaluations and
// keeps its validations, so a finished run's champion is still validated.
//
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_SCHEDULER_TASK_QUEUE_H_
#define SKERRY_SERVER_SCHEDULER_TASK_QUEUE_H_

#include <cstddef>
#include <cstdint>
#include <deque>
#include <map>
#include <memory>
#include <optional>
#include <set>
#include <unordered_map>
#include <utility>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "absl/types/span.h"
#include "common/clock.h"
#include "common/sample_recipe.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::scheduler {

// Task ids of validations (fleet.proto): kValidationTaskBase + validation id.
constexpr int64_t kValidationTaskBase = int64_t{1} << 62;
// The bounds of a run's weight (its priority): values outside are clamped.
inline constexpr uint32_t kMinWeight = 1;
inline constexpr uint32_t kMaxWeight = 1000;
// Leases of one task remembered for the result rule (late results).
inline constexpr size_t kMaxHoldersKept = 16;

struct TaskInfo {
  skerry::v1::TaskKind kind = skerry::v1::TASK_EVALUATE;
  int64_t genome_id = 0;
  int64_t validation_id = 0;  // TASK_VALIDATE
  int64_t run_id = 0;
  uint32_t island = 0;
  uint32_t generation = 0;
  uint32_t slot = 0;
  std::vector<double> genes;
  // gene_precision FLOAT32: the genes are float32 values, sent as
  // Task.genes32 (4 bytes each).
  bool float32 = false;
  uint64_t eval_seed = 0;
  // A natural ES sample (common/sample_recipe.h): a lease that asks for
  // recipes (LeaseShape) sends this and the centre's id instead of the
  // genes; `centre` holds the centre's genes for the lease response.
  std::optional<SampleRecipe> recipe;
  int64_t centre_id = 0;
  std::shared_ptr<const std::vector<double>> centre;
  std::shared_ptr<const skerry::v1::EvaluatorSpec> evaluator;
  uint32_t attempts =
      0;  // leases handed out so far (the current attempt number)

  // The id the worker sees and the queue keys on: the genome's id, or
  // kValidationTaskBase + the validation's id.
  int64_t task_id() const {
    return kind == skerry::v1::TASK_VALIDATE
               ? kValidationTaskBase + validation_id
               : genome_id;
  }
};

class TaskQueue {
 public:
  TaskQueue(Clock* clock, absl::Duration lease);

  absl::Duration lease() const { return lease_; }

  // Adds queued tasks. A task whose task id is already known is ignored.
  void Add(std::vector<TaskInfo> tasks);
  // Drops every evaluation of a run (stopped, finished), or the given tasks.
  void RemoveRun(int64_t run_id);
  void Remove(absl::Span<const int64_t> task_ids);
  void SetPaused(int64_t run_id, bool paused);
  // The run's share weight (see the fair share above), clamped to
  // [kMinWeight, kMaxWeight]. A run never given one has kMinWeight. May be
  // called before the run's first task is added.
  void SetWeight(int64_t run_id, uint32_t weight);
  // Holds every run: nothing is leased while held (the coordinator cannot
  // write its database). Renewals and claims go on.
  void SetHeld(bool held);

  // Leases up to `max_tasks` tasks to `worker`, waiting up to `wait` (real
  // time) when none is ready. Expired leases are re-queued first. Each leased
  // task's attempt count goes up by one. The tasks' sizes (TaskBytes) add up
  // to at most `max_bytes`, except that one task is always handed out. At
  // most the worker's share of the ready tasks is handed out (the split among
  // workers, above).
  std::vector<skerry::v1::Task> Lease(int64_t worker, uint32_t max_tasks,
                                      absl::Duration wait,
                                      size_t max_bytes = SIZE_MAX);
  // The same for a worker that builds natural ES samples itself (worker
  // protocol 4): a sample goes as Task.sample, without genes, and
  // `*centres` gets the centre of every such task that is not in `held`
  // (once each), which the sizes count too.
  struct Centres {
    absl::Span<const uint64_t> held;
    std::vector<std::pair<int64_t, std::shared_ptr<const std::vector<double>>>>
        wanted;
  };
  std::vector<skerry::v1::Task> Lease(int64_t worker, uint32_t max_tasks,
                                      absl::Duration wait, size_t max_bytes,
                                      Centres* centres);
  // Extends the deadlines of tasks that `worker` still holds.
  void Renew(int64_t worker, absl::Span<const uint64_t> task_ids);
  // A leaving worker gives tasks back: each of task_ids (with all_held, every
  // task) leased to `worker` is queued again at once, at the front, and its
  // attempt count goes back down by one (a handed-back lease is not an
  // attempt). With all_held the worker has left: Lease calls under its id,
  // including one still waiting whose caller has gone, hand out nothing
  // more. Returns how many were queued again.
  size_t HandBack(int64_t worker, absl::Span<const uint64_t> task_ids,
                  bool all_held);

  // Claims a task for committing a result (see the result rule above). Returns
  // the task, or nothing when the result must be ignored.
  // When nothing is returned and `why` is given, *why says why (a NotFound,
  // Aborted, PermissionDenied or FailedPrecondition status naming the task).
  std::optional<TaskInfo> Claim(int64_t worker, uint64_t task_id,
                                uint32_t attempt, bool failed_attempt,
                                absl::Status* why = nullptr);
  // Records that attempt `attempt` of the task was leased to `worker` (by
  // this or an earlier coordinator process: the caller checked its lease
  // proof), so that Claim takes its result like any late one. Does nothing
  // for an unknown task or a lease already known.
  void NoteLease(int64_t worker, uint64_t task_id, uint32_t attempt);
  // The commit holding claimed results succeeded: forget them.
  void Complete(absl::Span<const int64_t> task_ids);
  // The commit failed, or the attempt failed and may be retried: queue again.
  void Unclaim(absl::Span<const int64_t> task_ids);

  // Wakes every waiting Lease call; later calls return at once.
  void Shutdown();

  struct Counts {
    size_t queued = 0;
    size_t leased = 0;
    size_t claimed = 0;
  };
  Counts counts() const;
  // Tasks waiting per run, and tasks leased or claimed per worker (for the
  // metrics and the worker list).
  struct Load {
    std::map<int64_t, size_t> queued_by_run;
    std::map<int64_t, size_t> held_by_worker;
  };
  Load load() const;

 private:
  enum class State { kQueued, kLeased, kClaimed };
  struct Entry {
    TaskInfo info;
    State state = State::kQueued;
    int64_t holder = 0;
    absl::Time deadline;
    // (attempt, worker) of the last kMaxHoldersKept leases, oldest first.
    std::vector<std::pair<uint32_t, int64_t>> holders;
  };
  struct RunQueue {
    std::deque<int64_t> ids;  // may hold ids no longer queued; skipped lazily
    size_t queued = 0;        // entries of this run in state kQueued
    bool paused = false;
    uint32_t weight = kMinWeight;
    uint64_t vtime = 0;  // virtual start of the run's next task
  };
  // One task costs a run of weight W kVirtualUnit / W of virtual time. The
  // unit is divisible by every weight from 1 to 16 and by 20, 25, 50, 100,
  // 1000 ...; for other weights the rounding is under 1.4e-6 of a task.
  static constexpr uint64_t kVirtualUnit = 720720000;

  void ExpireLeases(absl::Time now) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void Enqueue(Entry& e, bool front) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  bool HasReadyLocked() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The run becomes ready: it starts no earlier than virtual now.
  void CatchUp(RunQueue& rq) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The ready run with the smallest virtual time, or runs_.end().
  std::map<int64_t, RunQueue>::iterator NextRun()
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Leases the front queued task of `rq` to `worker` until `deadline`.
  // With `centres`, a sample goes as its recipe (Lease, Centres).
  skerry::v1::Task LeaseFrom(RunQueue& rq, int64_t worker, absl::Time deadline,
                             Centres* centres)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  void DropLease(Entry& e) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The size on the wire of the front queued task of `rq` (rq.queued > 0),
  // an upper estimate; drops stale ids from the front.
  // With `centres`, a sample's size is its recipe's, plus its centre's
  // when the lease must carry that.
  size_t FrontTaskBytes(RunQueue& rq, const Centres* centres)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  Clock* const clock_;
  const absl::Duration lease_;

  mutable absl::Mutex mu_;
  std::unordered_map<int64_t, Entry> tasks_ ABSL_GUARDED_BY(mu_);
  std::map<int64_t, RunQueue> runs_ ABSL_GUARDED_BY(mu_);
  std::set<std::pair<absl::Time, int64_t>> deadlines_ ABSL_GUARDED_BY(mu_);
  // The virtual time at which the last task was handed out.
  uint64_t virtual_now_ ABSL_GUARDED_BY(mu_) = 0;
  bool shutdown_ ABSL_GUARDED_BY(mu_) = false;
  bool held_ ABSL_GUARDED_BY(mu_) = false;
  // Workers that handed back everything (HandBack with all_held).
  std::set<int64_t> departed_ ABSL_GUARDED_BY(mu_);
  // The split among workers (above): each asking worker's last lease call
  // (queue clock) and the max_tasks it asked for.
  struct Asker {
    absl::Time last;
    uint32_t asks = 0;
  };
  std::map<int64_t, Asker> askers_ ABSL_GUARDED_BY(mu_);
  // Tasks in state kLeased, by holder.
  std::map<int64_t, uint64_t> leased_by_ ABSL_GUARDED_BY(mu_);
  // One task of `worker` is no longer leased.
  void Unhold(int64_t worker) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // The most `worker`, asking for `max_tasks`, may take now (at least 1).
  uint32_t ShareOf(int64_t worker, uint32_t max_tasks)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
};

}  // namespace skerry::scheduler

#endif  // SKERRY_SERVER_SCHEDULER_TASK_QUEUE_H_
