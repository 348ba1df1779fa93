// The stateless worker: joins a coordinator, leases batches of tasks, evaluates
// them on N threads, reports batches of results, and leases the next batch
// while the current one is evaluated. When the coordinator is away it retries
// with capped exponential backoff and joins again; the only state it ever holds
// is its current lease, which is safe to lose (the coordinator re-offers
// expired tasks).
//
// Thread safety: Run() is called once, from one thread; Stop() from any thread.
#ifndef SKERRY_WORKER_WORKER_H_
#define SKERRY_WORKER_WORKER_H_

#include <atomic>
#include <cstdint>
#include <memory>
#include <string>

#include "absl/status/status.h"
#include "absl/time/time.h"
#include "common/clock.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "worker/task_evaluation.h"

namespace skerry::worker {

struct WorkerOptions {
  std::string name;                        // default: host name and pid
  int threads = 1;                         // evaluation threads
  uint32_t batch = 0;                      // tasks per lease; 0: 4 x threads
  absl::Duration wait = absl::Seconds(5);  // long-poll bound
  absl::Duration rpc_deadline = absl::Seconds(30);  // per RPC, beyond the wait
  absl::Duration max_backoff = absl::Seconds(10);
  absl::Duration report_interval = absl::Milliseconds(200);  // flush bound
  // Stop after this many results have been reported (0: never). For tests and
  // the benchmark.
  uint64_t max_results = 0;
  // Stop once the worker has held no task and been given none for this long
  // (0: never). Time the coordinator is unreachable counts as idle, so a
  // worker on a batch allocation ends when its run and coordinator do.
  absl::Duration exit_when_idle = absl::ZeroDuration();
  // Makes the evaluators (one per evaluation thread and spec). Empty:
  // MakeEvaluator. Tests inject evaluators they control.
  EvaluatorFactory make_evaluator;
};

class Worker {
 public:
  Worker(std::unique_ptr<skerry::v1::FleetService::StubInterface> stub,
         WorkerOptions options, Clock* clock);
  ~Worker();

  // Works until Stop() is called (or max_results is reached). Returns OK then.
  absl::Status Run();
  // Asks Run() to return soon; results already computed are reported first when
  // the coordinator is reachable.
  void Stop();

  uint64_t results_reported() const;
  // True when Run() ended because of exit_when_idle.
  bool exited_idle() const;

 private:
  class Impl;
  std::unique_ptr<Impl> impl_;
};

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_WORKER_H_
