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

namespace skerry::worker {

// Makes an Evaluator from its spec; MakeWorkerEvaluator by default. Tests
// inject their own to control timing.
using EvaluatorFactory =
    std::function<absl::StatusOr<std::unique_ptr<Evaluator>>(
        const skerry::v1::EvaluatorSpec&)>;

// The worker's dispatch: `external` or `isolate` -> a ProcessEvaluator (for
// isolate, host_command is the evaluator host to run; empty: this executable
// with --evaluator-host), anything else -> MakeEvaluator in-process.
EvaluatorFactory WorkerEvaluatorFactory(std::vector<std::string> host_command);
// WorkerEvaluatorFactory({}) applied to spec.
absl::StatusOr<std::unique_ptr<Evaluator>> MakeWorkerEvaluator(
    const skerry::v1::EvaluatorSpec& spec);

// One thread's evaluators, keyed by the spec's serialized bytes. A spec that
// cannot be made is remembered too, so it is not retried for every task.
class EvaluatorCache {
 public:
  explicit EvaluatorCache(EvaluatorFactory factory);
  // The evaluator for spec, or why there is none. The pointer stays valid for
  // the cache's lifetime.
  absl::StatusOr<Evaluator*> Get(const skerry::v1::EvaluatorSpec& spec);

 private:
  EvaluatorFactory factory_;
  std::map<std::string, absl::StatusOr<std::unique_ptr<Evaluator>>> by_spec_;
};

// Evaluates task with its evaluator (a TASK_VALIDATE task: on the run's
// held-out cases, common/validation.h); eval_seconds is measured on clock.
skerry::v1::TaskResult EvaluateTask(const skerry::v1::Task& task,
                                    EvaluatorCache& cache, Clock* clock);

}  // namespace skerry::worker

#endif  // SKERRY_WORKER_TASK_EVALUATION_H_
