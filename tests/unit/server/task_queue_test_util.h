// Helpers shared by the task queue tests: tasks of a run, ids of a lease, and
// per-run counts of what was handed out.
#ifndef SKERRY_TESTS_UNIT_SERVER_TASK_QUEUE_TEST_UTIL_H_
#define SKERRY_TESTS_UNIT_SERVER_TASK_QUEUE_TEST_UTIL_H_

#include <cstdint>
#include <map>
#include <memory>
#include <utility>
#include <vector>

#include "server/scheduler/task_queue.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::scheduler::testing {

inline std::shared_ptr<const skerry::v1::EvaluatorSpec> Sphere() {
  auto spec = std::make_shared<skerry::v1::EvaluatorSpec>();
  spec->mutable_builtin()->set_function("sphere");
  return spec;
}

// `count` tasks of run `run_id` with genome ids first, first + 1, ...
inline std::vector<TaskInfo> Tasks(int64_t run_id, int64_t first, int count) {
  std::vector<TaskInfo> out;
  const auto evaluator = Sphere();
  for (int i = 0; i < count; ++i) {
    TaskInfo t;
    t.genome_id = first + i;
    t.run_id = run_id;
    t.slot = static_cast<uint32_t>(i);
    t.genes = {0.5 * i, -1.0};
    t.eval_seed = 1000 + static_cast<uint64_t>(first + i);
    t.evaluator = evaluator;
    out.push_back(std::move(t));
  }
  return out;
}

inline std::vector<uint64_t> Ids(const std::vector<skerry::v1::Task>& tasks) {
  std::vector<uint64_t> ids;
  for (const skerry::v1::Task& t : tasks) ids.push_back(t.task_id());
  return ids;
}

// Tasks handed out per run id.
inline std::map<uint64_t, int> PerRun(
    const std::vector<skerry::v1::Task>& tasks) {
  std::map<uint64_t, int> per_run;
  for (const skerry::v1::Task& t : tasks) ++per_run[t.run_id()];
  return per_run;
}

}  // namespace skerry::scheduler::testing

#endif  // SKERRY_TESTS_UNIT_SERVER_TASK_QUEUE_TEST_UTIL_H_
