// The engine's stop rules end runs in a state `skerry-coordinator --check`
// accepts: every island of an ended run is done and no genome of a finished
// run is left pending (server/engine/engine.h, "Stop rules"). Time is moved
// with FakeClock; the test plays the fleet.
#include <cmath>
#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "common/clock.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using skerry::v1::Task;
using skerry::v1::TaskResult;
using ::testing::HasSubstr;

constexpr int64_t kWorker = 1;

RunSpec TwoIslands() {
  RunSpec spec;
  spec.set_name("stop-test");
  spec.set_seed(5);
  spec.set_genome_length(2);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(4);
  spec.mutable_islands()->set_count(2);
  spec.mutable_islands()->set_interval(100);  // no migration
  spec.mutable_stop()->set_max_generations(50);
  return spec;
}

// Scores a task: `score(island, generation, slot)`; NaN means "failed".
using Score = std::function<double(const store::GenomeRecord&)>;

class EngineStopTest : public ::testing::Test {
 protected:
  void SetUp() override {
    absl::StatusOr<std::unique_ptr<store::Store>> s =
        store::Store::Open(path());
    ASSERT_TRUE(s.ok()) << s.status();
    store_ = std::move(*s);
    queue_ = std::make_unique<scheduler::TaskQueue>(&clock_, absl::Seconds(30));
    absl::StatusOr<std::unique_ptr<Engine>> e =
        Engine::Open(store_.get(), queue_.get(), &clock_);
    ASSERT_TRUE(e.ok()) << e.status();
    engine_ = std::move(*e);
  }
  void TearDown() override {
    engine_.reset();
    queue_.reset();
    store_.reset();
  }
  std::string path() const { return dir_.File("skerry.db"); }

  int64_t Submit(const RunSpec& spec) {
    absl::StatusOr<store::RunRecord> run =
        engine_->Submit(spec, "spec text", "alice");
    EXPECT_TRUE(run.ok()) << run.status();
    return run.ok() ? run->id : 0;
  }

  // Leases every task, scores and reports those of `island` (all islands when
  // negative); returns how many. Tasks of other islands are held for later.
  size_t Round(const Score& score, int island = -1) {
    std::vector<Task> tasks =
        queue_->Lease(kWorker, 1000, absl::ZeroDuration());
    tasks.insert(tasks.end(), held_.begin(), held_.end());
    held_.clear();
    std::vector<TaskResult> results;
    for (const Task& t : tasks) {
      absl::StatusOr<store::GenomeRecord> g =
          store_->genomes().GetGenome(static_cast<int64_t>(t.task_id()));
      EXPECT_TRUE(g.ok()) << g.status();
      if (!g.ok()) continue;
      if (island >= 0 && g->island != static_cast<uint32_t>(island)) {
        held_.push_back(t);  // still leased to kWorker; reported later
        continue;
      }
      TaskResult r;
      r.set_task_id(t.task_id());
      r.set_attempt(t.attempt());
      const double s = score(*g);
      if (std::isnan(s)) {
        r.set_error("the simulator crashed");
      } else {
        r.set_score(s);
      }
      r.set_eval_seconds(0.01);
      results.push_back(r);
    }
    if (results.empty()) return 0;
    absl::StatusOr<ReportOutcome> out = engine_->Report(kWorker, results);
    EXPECT_TRUE(out.ok()) << out.status();
    Settle();
    return results.size();
  }

  // The committer holds the engine's lock until it has bred what followed
  // its commit; ListSummaries takes that lock.
  void Settle() { EXPECT_TRUE(engine_->ListSummaries().ok()); }

  store::RunRecord Run(int64_t id) {
    absl::StatusOr<store::RunRecord> r = store_->runs().GetRun(id);
    EXPECT_TRUE(r.ok()) << r.status();
    return r.ok() ? *r : store::RunRecord();
  }

  void ExpectCheckPasses() {
    absl::StatusOr<store::CheckReport> report = store::CheckDatabase(path());
    ASSERT_TRUE(report.ok()) << report.status();
    EXPECT_TRUE(report->ok()) << report->ToString();
  }

  void ExpectEveryIslandDone(int64_t id) {
    absl::StatusOr<std::vector<store::IslandRecord>> islands =
        store_->runs().GetIslands(id);
    ASSERT_TRUE(islands.ok()) << islands.status();
    ASSERT_FALSE(islands->empty());
    for (const store::IslandRecord& i : *islands) {
      EXPECT_TRUE(i.done) << "island " << i.index;
    }
  }

  testing::TempDir dir_;
  FakeClock clock_;
  std::unique_ptr<store::Store> store_;
  std::unique_ptr<scheduler::TaskQueue> queue_;
  std::unique_ptr<Engine> engine_;
  std::vector<Task> held_;
};

double Sphere(const store::GenomeRecord& g) {
  double s = 0;
  for (double x : g.genes) s += x * x;  // Jamil & Yang 2013 (REFERENCES.md)
  return s;
}

// The observed bug: a run stopped by max_wall_seconds left its current
// generation pending, and --check failed on it.
TEST_F(EngineStopTest, WallTimeLimitLeavesNoGenomePendingAndCheckPasses) {
  RunSpec spec = TwoIslands();
  spec.mutable_stop()->set_max_wall_seconds(60);
  const int64_t id = Submit(spec);
  ASSERT_EQ(Round(Sphere), 8u);  // generation 0 of both islands
  EXPECT_EQ(Run(id).state, skerry::v1::RUNNING);

  // The limit passes while generation 1 is being evaluated: the run goes on
  // to the end of that generation, and no further.
  clock_.Advance(absl::Seconds(61));
  Settle();
  EXPECT_EQ(Run(id).state, skerry::v1::RUNNING);
  EXPECT_GT(Round(Sphere), 0u);  // generation 1
  const store::RunRecord run = Run(id);
  EXPECT_EQ(run.state, skerry::v1::FINISHED) << run.message;
  EXPECT_THAT(run.message, HasSubstr("wall-time limit (60 s) reached"));
  EXPECT_TRUE(queue_->Lease(kWorker, 1000, absl::ZeroDuration()).empty());
  ExpectEveryIslandDone(id);
  ExpectCheckPasses();
}

TEST_F(EngineStopTest, WallTimeLimitNotReachedChangesNothing) {
  RunSpec spec = TwoIslands();
  spec.mutable_stop()->set_max_wall_seconds(60);
  spec.mutable_stop()->set_max_generations(3);
  const int64_t id = Submit(spec);
  for (int i = 0; i < 3; ++i) {
    clock_.Advance(absl::Seconds(10));  // 30 s in all: under the limit
    ASSERT_GT(Round(Sphere), 0u) << "generation " << i;
  }
  const store::RunRecord run = Run(id);
  EXPECT_EQ(run.state, skerry::v1::FINISHED);
  EXPECT_THAT(run.message, HasSubstr("generation limit (3) reached"));
}

// The observed bug: a run ended by its target score left the islands that
// had bred past the stop generation not marked done.
TEST_F(EngineStopTest, TargetScoreRunMarksEveryIslandDone) {
  RunSpec spec = TwoIslands();
  spec.mutable_stop()->set_target_score(0.5);
  const int64_t id = Submit(spec);
  // Island 1 runs ahead to generation 3 scoring 1; island 0 then reaches the
  // target in generation 0.
  for (int g = 0; g < 3; ++g) {
    ASSERT_GT(Round([](const store::GenomeRecord&) { return 1.0; }, 1), 0u);
  }
  ASSERT_GT(Round([](const store::GenomeRecord&) { return 0.25; }, 0), 0u);
  const store::RunRecord run = Run(id);
  EXPECT_EQ(run.state, skerry::v1::FINISHED) << run.message;
  EXPECT_THAT(run.message, HasSubstr("target score reached at generation 0"));
  ExpectEveryIslandDone(id);
  ExpectCheckPasses();
}

TEST_F(EngineStopTest, StoppedRunHasEveryIslandDone) {
  const int64_t id = Submit(TwoIslands());
  ASSERT_GT(Round(Sphere), 0u);
  ASSERT_TRUE(engine_->Stop(id).ok());
  EXPECT_EQ(Run(id).state, skerry::v1::STOPPED);
  ExpectEveryIslandDone(id);
  ExpectCheckPasses();
}

// The observed bug: a run whose every genome failed ended `finished` with no
// champion, and `skerry local` exited 0.
TEST_F(EngineStopTest, RunWhoseEveryEvaluationFailedEndsFailedWithTheReason) {
  RunSpec spec = TwoIslands();
  spec.mutable_stop()->set_max_generations(2);
  spec.set_max_attempts(1);
  const int64_t id = Submit(spec);
  auto crash = [](const store::GenomeRecord&) { return std::nan(""); };
  for (int i = 0; i < 10 && Run(id).state == skerry::v1::RUNNING; ++i) {
    Round(crash);
  }
  const store::RunRecord run = Run(id);
  EXPECT_EQ(run.state, skerry::v1::FAILED_RUN) << run.message;
  EXPECT_THAT(run.message, HasSubstr("every evaluation failed"));
  EXPECT_THAT(run.message, HasSubstr("the simulator crashed"));
  EXPECT_EQ(run.champion_id, 0);
  ExpectEveryIslandDone(id);
  ExpectCheckPasses();
}

}  // namespace
}  // namespace skerry::engine
