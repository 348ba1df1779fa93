// Test support: a store, task queue and engine opened together on one
// database file (as the coordinator opens them), a small sphere spec, and the
// sphere scores a test fleet reports. For tests that play the fleet against
// the engine (tests/fault/engine_fault_test.cc, corruption_sweep_test.cc);
// they link skerry_server.
//
// Thread safety: a Harness is used from the test's thread; the engine's own
// threads are joined when it is destroyed.
#ifndef SKERRY_TESTS_SUPPORT_ENGINE_HARNESS_H_
#define SKERRY_TESTS_SUPPORT_ENGINE_HARNESS_H_

#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/time/time.h"
#include "common/clock.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "skerry/v1/fleet.pb.h"
#include "skerry/v1/spec.pb.h"

namespace skerry::testing {

// Two islands of 6 on a 3-gene sphere for 4 generations, migrating every
// generation (the shape of engine_test's SmallSpec, one generation more).
inline skerry::v1::RunSpec SmallSphereSpec(const std::string& name,
                                           uint64_t seed) {
  skerry::v1::RunSpec spec;
  spec.set_name(name);
  spec.set_seed(seed);
  spec.set_genome_length(3);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(6);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_ga()->set_immigrants(1);
  spec.mutable_islands()->set_count(2);
  spec.mutable_islands()->set_interval(1);
  spec.mutable_islands()->set_migrants(1);
  spec.mutable_stop()->set_max_generations(4);
  return spec;
}

// Store, queue and engine, opened and closed together.
struct EngineHarness {
  std::unique_ptr<store::Store> store;
  std::unique_ptr<scheduler::TaskQueue> queue;
  std::unique_ptr<engine::Engine> engine;
  ~EngineHarness() {
    engine.reset();  // joins the committer first
    queue.reset();
    store.reset();
  }
};

// Opens the database at `path` with `options` (a fault VFS, say); with
// `quick_check`, also as the coordinator does at start (Database::QuickCheck).
// The status says why it would not open.
inline absl::StatusOr<std::unique_ptr<EngineHarness>> OpenEngineHarness(
    const std::string& path, const store::Store::Options& options,
    bool quick_check, Clock* clock) {
  auto h = std::make_unique<EngineHarness>();
  absl::StatusOr<std::unique_ptr<store::Store>> s =
      store::Store::Open(path, options);
  if (!s.ok()) return s.status();
  h->store = std::move(*s);
  if (quick_check) {
    if (absl::Status q = h->store->db().QuickCheck(); !q.ok()) return q;
  }
  h->queue = std::make_unique<scheduler::TaskQueue>(clock, absl::Seconds(30));
  absl::StatusOr<std::unique_ptr<engine::Engine>> e =
      engine::Engine::Open(h->store.get(), h->queue.get(), clock);
  if (!e.ok()) return e.status();
  h->engine = std::move(*e);
  return h;
}

// Sphere: sum of x_i^2 (Jamil & Yang 2013, see REFERENCES.md), one result per
// task, each taking `eval_seconds`.
inline std::vector<skerry::v1::TaskResult> SphereResults(
    const std::vector<skerry::v1::Task>& tasks, double eval_seconds) {
  std::vector<skerry::v1::TaskResult> out;
  for (const skerry::v1::Task& t : tasks) {
    skerry::v1::TaskResult r;
    r.set_task_id(t.task_id());
    r.set_attempt(t.attempt());
    double s = 0.0;
    for (double x : t.genes()) s += x * x;
    r.set_score(s);
    r.set_eval_seconds(eval_seconds);
    out.push_back(r);
  }
  return out;
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_SUPPORT_ENGINE_HARNESS_H_
