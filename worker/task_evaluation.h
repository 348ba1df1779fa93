// Evaluating one leased task: the seam between the worker's threads and the
// evaluators. EvaluateTask turns a Task into a TaskResult and never fails: a
// missing evaluator, a non-OK status, a C++ exception or a non-finite score
// becomes result.error.
//
// Where an evaluator runs: external evaluators, and any evaluator whose spec
// says `isolate`, run in a child process (ProcessEvaluator), which enforces
// EvaluatorSpec.time_limit_seconds by killing the child; built-ins otherwise
// run in the evaluation thread itself, where a hang cannot be interrupted.
//
// Thread safety: an EvaluatorCache belongs to one evaluation thread (evaluators
// need not be thread-safe). EvaluateTask is safe to call concurrently with
// distinct caches.
#ifndef SKERRY_WORKER_TASK_EVALUATION_H_
#define SKERRY_WORKER_TASK_EVALUATION_H_

#include <functional>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "common/clock.h"
#include "common/evaluator.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/spec.pb.h"
#include "worker/child_process.h"
#include "worker/sandbox.h"

namespace skerry::worker {

// Makes an Evaluator from its spec; MakeWorkerEvaluator by default. Tests
// inject their own to control timing.
using EvaluatorFactory =
    std::function<absl::StatusOr<std::unique_ptr<Evaluator>>(
        const skerry::v1::EvaluatorSpec&)>;

// What every child-process evaluator of one worker shares.
struct ChildSetting {
  std::shared_ptr<const Sandbox> sandbox;          // null: none
  std::shared_ptr<child::ChildRegistry> registry;  // null: none
  Clock* clock = nullptr;                          // null: the real clock
};

// The worker's dispatch: `external` or `isolate` -> a ProcessEvaluator (for
// isolate, host_command is the evaluator host to run; empty: this executable
// with --evaluator-host), anything else -> MakeEvaluator in-process.
EvaluatorFactory WorkerEvaluatorFactory(std::vector<std::string> host_command,
                                        ChildSetting setting = {});
// WorkerEvaluatorFactory({}) applied to spec.
absl::StatusOr<std::unique_ptr<Evaluator>> MakeWorkerEvaluator(
    const skerry::v1::EvaluatorSpec& spec);

// How many evaluators a cache keeps, and for how long unused.
struct CacheLimits {
  size_t max_entries = 4;
  absl::Duration max_idle = absl::Minutes(5);
};

// One thread's evaluators, keyed by the spec's serialized bytes. A spec that
// cannot be made is remembered too, so it is not retried for every task.
// Evaluators (and with them their child processes) are dropped when unused
// for longer than max_idle (by Get and ReapIdle) and, least recently used
// first, when more than max_entries are kept; a dropped one is made again
// when its spec comes back.
class EvaluatorCache {
 public:
  explicit EvaluatorCache(EvaluatorFactory factory, Clock* clock = nullptr,
                          CacheLimits limits = {});
  // The evaluator for spec, or why there is none. The pointer stays valid
  // until the next Get or ReapIdle.
  absl::StatusOr<Evaluator*> Get(const skerry::v1::EvaluatorSpec& spec);
  // Drops the evaluators unused for longer than max_idle.
  void ReapIdle();
  // How long until ReapIdle would drop one (just past it); max_idle when the
  // cache is empty.
  absl::Duration TimeToNextExpiry();
  size_t size() const { return by_spec_.size(); }

 private:
  struct Entry {
    absl::StatusOr<std::unique_ptr<Evaluator>> evaluator;
    absl::Time last_used;
  };
  EvaluatorFactory factory_;
  Clock* const clock_;
  const CacheLimits limits_;
  std::map<std::string, Entry> by_spec_;
};

// Worker protocol 4: a natural ES sample sent as its recipe (Task.sample)
// gets its genes, built from its centre's genes by common/sample_recipe.h
// (the function the coordinator made and stores it with), and loses the
// recipe. FailedPrecondition, naming the centre, when `centre` is null (not
// held) or not the recipe's length; nothing for a task with genes.
absl::Status ExpandSample(skerry::v1::Task* task,
                          const std::vector<double>* centre);

// Evaluates task with its evaluator (a TASK_VALIDATE task: on the run's
// held-out cases, common/validation.h); eval_seconds is measured on clock.
skerry::v1::TaskResult EvaluateTask(const skerry::v1::Task& task,
                                    EvaluatorCache& cache, Clock* clock);

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_TASK_EVALUATION_H_
