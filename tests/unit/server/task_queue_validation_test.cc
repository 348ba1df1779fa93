// Validation tasks in the task queue (server/scheduler/task_queue.h): their own
// id space, the kind on the wire, the result rule, and that they outlive their
// run's search.
#include <memory>
#include <vector>

#include "absl/time/time.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/scheduler/task_queue.h"

namespace skerry::scheduler {
namespace {

constexpr absl::Duration kLease = absl::Seconds(10);
constexpr absl::Duration kNoWait = absl::ZeroDuration();

TaskInfo Task(skerry::v1::TaskKind kind, int64_t run_id, int64_t genome_id,
              int64_t validation_id) {
  auto spec = std::make_shared<skerry::v1::EvaluatorSpec>();
  spec->mutable_cart_pole();
  TaskInfo t;
  t.kind = kind;
  t.run_id = run_id;
  t.genome_id = genome_id;
  t.validation_id = validation_id;
  t.genes = {1.0, 2.0};
  t.eval_seed = 77;
  t.evaluator = spec;
  return t;
}

class TaskQueueValidationTest : public ::testing::Test {
 protected:
  FakeClock clock_;
  TaskQueue queue_{&clock_, kLease};
};

TEST_F(TaskQueueValidationTest, AGenomeCanBeEvaluatedAndValidatedAtOnce) {
  queue_.Add({Task(skerry::v1::TASK_EVALUATE, 1, 5, 0),
              Task(skerry::v1::TASK_VALIDATE, 1, 5, 5)});
  std::vector<skerry::v1::Task> leased = queue_.Lease(1, 10, kNoWait);
  ASSERT_EQ(leased.size(), 2u) << "same genome, two different tasks";
  EXPECT_EQ(leased[0].task_id(), 5u);
  EXPECT_EQ(leased[0].kind(), skerry::v1::TASK_EVALUATE);
  EXPECT_EQ(leased[1].task_id(), (uint64_t{1} << 62) + 5);
  EXPECT_EQ(leased[1].kind(), skerry::v1::TASK_VALIDATE);
  EXPECT_EQ(leased[1].eval_seed(), 77u);

  std::optional<TaskInfo> v =
      queue_.Claim(1, leased[1].task_id(), leased[1].attempt(), false);
  ASSERT_TRUE(v.has_value());
  EXPECT_EQ(v->kind, skerry::v1::TASK_VALIDATE);
  EXPECT_EQ(v->validation_id, 5);
  EXPECT_EQ(v->genome_id, 5);
  queue_.Complete({v->task_id()});
  EXPECT_FALSE(queue_.Claim(1, leased[1].task_id(), 1, false).has_value())
      << "a completed validation takes no second result";
  EXPECT_TRUE(queue_.Claim(1, 5, 1, false).has_value())
      << "the evaluation is still open";
}

TEST_F(TaskQueueValidationTest, ValidationsOutliveTheirRunsSearch) {
  queue_.Add({Task(skerry::v1::TASK_EVALUATE, 1, 5, 0),
              Task(skerry::v1::TASK_VALIDATE, 1, 4, 9),
              Task(skerry::v1::TASK_EVALUATE, 1, 6, 0)});
  queue_.SetPaused(1, true);
  queue_.RemoveRun(1);  // stopped while paused
  std::vector<skerry::v1::Task> leased = queue_.Lease(1, 10, kNoWait);
  ASSERT_EQ(leased.size(), 1u);
  EXPECT_EQ(leased[0].kind(), skerry::v1::TASK_VALIDATE);
  // An expired validation lease comes back like any other.
  clock_.Advance(kLease + absl::Seconds(1));
  leased = queue_.Lease(2, 10, kNoWait);
  ASSERT_EQ(leased.size(), 1u);
  EXPECT_EQ(leased[0].attempt(), 2u);
  TaskQueue::Counts c = queue_.counts();
  EXPECT_EQ(c.queued + c.leased + c.claimed, 1u);
}

}  // namespace
}  // namespace skerry::scheduler
