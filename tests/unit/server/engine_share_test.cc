// The engine's side of the fair share (server/engine/engine.h, Submit): a
// run's priority is checked, stored, handed to the task queue as its weight,
// and read back from the store after a restart. The test plays a fleet that
// only leases; the split itself is tested in task_queue_share_test.cc.
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "absl/time/time.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "tests/support/process.h"
#include "tests/unit/server/task_queue_test_util.h"

namespace skerry::engine {
namespace {

using ::skerry::scheduler::testing::PerRun;
using ::testing::HasSubstr;

constexpr uint32_t kPopulation = 400;

skerry::v1::RunSpec BigGeneration() {
  skerry::v1::RunSpec spec;
  spec.set_name("share");
  spec.set_seed(5);
  spec.set_genome_length(2);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(kPopulation);
  spec.mutable_stop()->set_max_generations(2);
  return spec;
}

class EngineShareTest : public ::testing::Test {
 protected:
  void Open() {
    engine_.reset();
    queue_.reset();
    store_.reset();
    absl::StatusOr<std::unique_ptr<store::Store>> store =
        store::Store::Open(dir_.File("share.db"));
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = std::move(*store);
    queue_ = std::make_unique<scheduler::TaskQueue>(&clock_, absl::Hours(1));
    absl::StatusOr<std::unique_ptr<Engine>> engine =
        Engine::Open(store_.get(), queue_.get(), &clock_);
    ASSERT_TRUE(engine.ok()) << engine.status();
    engine_ = std::move(*engine);
  }

  absl::StatusOr<store::RunRecord> Submit(uint32_t priority) {
    return engine_->Submit(BigGeneration(), "", "alice", priority);
  }

  // Leases `count` tasks one at a time (no results) and counts them per run.
  std::map<uint64_t, int> LeaseOneByOne(int count) {
    std::map<uint64_t, int> total;
    for (int i = 0; i < count; ++i) {
      for (const auto& [run, n] :
           PerRun(queue_->Lease(1, 1, absl::ZeroDuration()))) {
        total[run] += n;
      }
    }
    return total;
  }

  skerry::testing::TempDir dir_;
  FakeClock clock_;
  std::unique_ptr<store::Store> store_;
  std::unique_ptr<scheduler::TaskQueue> queue_;
  std::unique_ptr<Engine> engine_;
};

TEST_F(EngineShareTest, SubmittedPriorityIsStoredAndSharesTheQueue) {
  Open();
  absl::StatusOr<store::RunRecord> low = Submit(1);
  absl::StatusOr<store::RunRecord> high = Submit(3);
  ASSERT_TRUE(low.ok()) << low.status();
  ASSERT_TRUE(high.ok()) << high.status();
  absl::StatusOr<store::RunRecord> stored = store_->runs().GetRun(high->id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->priority, 3);
  absl::StatusOr<skerry::v1::RunSummary> summary = engine_->Summary(high->id);
  ASSERT_TRUE(summary.ok()) << summary.status();
  EXPECT_EQ(summary->priority(), 3u);
  std::map<uint64_t, int> got = LeaseOneByOne(400);
  EXPECT_NEAR(got[static_cast<uint64_t>(low->id)], 100, 1);
  EXPECT_NEAR(got[static_cast<uint64_t>(high->id)], 300, 1);
}

TEST_F(EngineShareTest, UnsetPriorityIsOne) {
  Open();
  absl::StatusOr<store::RunRecord> run = Submit(0);
  ASSERT_TRUE(run.ok()) << run.status();
  EXPECT_EQ(run->priority, 1);
  absl::StatusOr<store::RunRecord> stored = store_->runs().GetRun(run->id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->priority, 1);
}

TEST_F(EngineShareTest, PriorityOutOfRangeIsRefusedAndNothingIsStored) {
  Open();
  for (uint32_t bad : {scheduler::kMaxWeight + 1, 1000000u}) {
    SCOPED_TRACE(bad);
    absl::StatusOr<store::RunRecord> run = Submit(bad);
    ASSERT_FALSE(run.ok());
    EXPECT_EQ(run.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(run.status().message(), HasSubstr("priority"));
    EXPECT_THAT(run.status().message(), HasSubstr("from 1 to 1000"));
  }
  absl::StatusOr<std::vector<store::RunRecord>> runs =
      store_->runs().ListRuns();
  ASSERT_TRUE(runs.ok()) << runs.status();
  EXPECT_TRUE(runs->empty());
}

TEST_F(EngineShareTest, WeightsComeBackFromTheStoreAfterARestart) {
  Open();
  absl::StatusOr<store::RunRecord> low = Submit(1);
  absl::StatusOr<store::RunRecord> high = Submit(3);
  ASSERT_TRUE(low.ok() && high.ok());
  Open();  // a new coordinator process: empty queue, weights from the store
  std::map<uint64_t, int> got = LeaseOneByOne(400);
  EXPECT_NEAR(got[static_cast<uint64_t>(low->id)], 100, 1);
  EXPECT_NEAR(got[static_cast<uint64_t>(high->id)], 300, 1);
}

// A changed priority is stored, applies to the next tasks, and survives a
// restart; a bad one or a missing run changes nothing.
TEST_F(EngineShareTest, ChangedPriorityAppliesToTheNextTasksAndIsKept) {
  Open();
  absl::StatusOr<store::RunRecord> a = Submit(1);
  absl::StatusOr<store::RunRecord> b = Submit(1);
  ASSERT_TRUE(a.ok() && b.ok());
  std::map<uint64_t, int> got = LeaseOneByOne(100);
  EXPECT_NEAR(got[static_cast<uint64_t>(a->id)], 50, 1);
  ASSERT_TRUE(engine_->SetPriority(b->id, 4).ok());
  got = LeaseOneByOne(250);
  EXPECT_NEAR(got[static_cast<uint64_t>(a->id)], 50, 1);
  EXPECT_NEAR(got[static_cast<uint64_t>(b->id)], 200, 1);
  absl::StatusOr<skerry::v1::RunSummary> summary = engine_->Summary(b->id);
  ASSERT_TRUE(summary.ok()) << summary.status();
  EXPECT_EQ(summary->priority(), 4u);

  absl::Status bad = engine_->SetPriority(b->id, 0);
  EXPECT_EQ(bad.code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(bad.message(), HasSubstr("priority: must be from 1 to 1000"));
  absl::Status missing = engine_->SetPriority(b->id + 100, 2);
  EXPECT_EQ(missing.code(), absl::StatusCode::kNotFound);
  absl::StatusOr<store::RunRecord> stored = store_->runs().GetRun(b->id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->priority, 4);

  Open();
  got = LeaseOneByOne(100);
  EXPECT_NEAR(got[static_cast<uint64_t>(a->id)], 20, 1);
  EXPECT_NEAR(got[static_cast<uint64_t>(b->id)], 80, 1);
}

}  // namespace
}  // namespace skerry::engine
