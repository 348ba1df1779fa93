// Group commit of worker reports.
//
// Any number of threads hand in a batch of results with Submit() and block.
// One committer thread takes every batch waiting and has them applied together
// by the `apply` callback: one store transaction, then `answer()` wakes every
// caller, then whatever follows (the engine breeds what the batch completed,
// holding its lock from before `answer()`, so a caller that takes that lock
// next sees it done; the engine does not hold its lock across the
// transaction itself). A result is acknowledged only after the transaction that
// holds it committed. Between batches, and at least every `tick` when nothing
// arrives, the committer runs `idle` (the engine retries what a failed write
// left undone and applies wall-time limits); not once shutting down, so that a
// shutdown does not wait for a failing disk.
//
// Thread safety: Submit and Shutdown from any thread; the callbacks run on the
// committer thread only, never concurrently with each other. `answer` takes
// the class's own mutex, so `apply` may call it holding a lock of its own that
// Submit's callers never hold.
#ifndef SKERRY_SERVER_ENGINE_GROUP_COMMIT_H_
#define SKERRY_SERVER_ENGINE_GROUP_COMMIT_H_

#include <cstdint>
#include <functional>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "absl/types/span.h"
#include "common/clock.h"
#include "skerry/v1/fleet.pb.h"

namespace skerry::engine {

struct ReportOutcome {
  uint32_t accepted = 0;
  uint32_t ignored = 0;
  std::vector<skerry::v1::RejectedResult> rejected;  // one per ignored result
};

// One Submit call's batch, as `apply` sees it: it sets status (not OK: the
// caller is told to report again) and outcome.
struct ReportJob {
  int64_t worker_id = 0;
  const std::vector<skerry::v1::TaskResult>* results = nullptr;
  absl::Status status;
  ReportOutcome outcome;
};

class GroupCommit {
 public:
  struct Callbacks {
    // Must call `answer` exactly once, after setting every job's outcome.
    std::function<void(absl::Span<ReportJob* const> jobs,
                       const std::function<void()>& answer)>
        apply;
    std::function<void()> idle;
    // Makes the `apply` in flight fail soon (the store's interrupt): for a
    // shutdown that must not wait for a hung disk. Any thread; may be empty.
    std::function<void()> interrupt;
  };
  static constexpr absl::Duration kShutdownGrace = absl::Seconds(10);
  static constexpr int kShutdownInterrupts = 9;

  // The tick runs on `clock`, so a test's FakeClock drives it.
  GroupCommit(Callbacks callbacks, Clock* clock, absl::Duration tick,
              absl::Duration shutdown_grace = kShutdownGrace)
      : callbacks_(std::move(callbacks)),
        clock_(clock),
        tick_(tick),
        shutdown_grace_(shutdown_grace) {}
  ~GroupCommit() { Shutdown(); }

  // Starts the committer thread.
  void Start();

  // Blocks until the batch is applied; Unavailable when it was not (retry) or
  // when the committer is shutting down.
  absl::StatusOr<ReportOutcome> Submit(
      int64_t worker_id, const std::vector<skerry::v1::TaskResult>& results);

  // Stops the committer after the batch in flight; batches still waiting are
  // answered Unavailable, and later Submit calls fail. Bounded: a batch still
  // in flight after the shutdown grace (real time) is interrupted
  // (callbacks.interrupt), again every second, at most kShutdownInterrupts
  // times; then the thread is joined. Idempotent; a second caller waits until
  // the first has joined.
  void Shutdown();

  // How many calls wait for the next batch (tests only).
  size_t WaitingForTest() {
    absl::MutexLock l(&mu_);
    return waiting_.size();
  }

 private:
  struct Waiting {
    ReportJob job;
    bool done = false;
  };
  void Loop();

  const Callbacks callbacks_;
  Clock* const clock_;
  const absl::Duration tick_;
  const absl::Duration shutdown_grace_;

  absl::Mutex mu_;
  std::vector<Waiting*> waiting_ ABSL_GUARDED_BY(mu_);
  bool stopping_ ABSL_GUARDED_BY(mu_) = false;
  bool exited_ ABSL_GUARDED_BY(mu_) = false;  // the loop has returned

  absl::Mutex shutdown_mu_ ABSL_ACQUIRED_BEFORE(mu_);  // the one joining

  std::thread thread_;
};

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_GROUP_COMMIT_H_
