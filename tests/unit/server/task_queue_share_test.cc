// Tests for the weighted fair share of the task queue
// (server/scheduler/task_queue.h, "Fair share"): splits by weight, idle runs,
// paused and held runs, huge populations beside small ones, three runs, and
// weight changes. Time is a FakeClock that never moves, so no lease expires.
//
// The lag bound checked after every hand-out is the fairness bound of
// start-time fair queuing with unit-cost tasks: for two runs ready throughout,
// |n_a / W_a - n_b / W_b| <= 1/W_a + 1/W_b (Goyal, Vin & Cheng 1996,
// SIGCOMM '96, the fairness theorem; from memory).
#include <cmath>
#include <cstdint>
#include <map>
#include <vector>

#include "absl/time/time.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/scheduler/task_queue.h"
#include "tests/unit/server/task_queue_test_util.h"

namespace skerry::scheduler {
namespace {

using ::skerry::scheduler::testing::PerRun;
using ::skerry::scheduler::testing::Tasks;
using ::testing::IsEmpty;

constexpr absl::Duration kLease = absl::Hours(1);
constexpr absl::Duration kNoWait = absl::ZeroDuration();

class TaskQueueShareTest : public ::testing::Test {
 protected:
  // `count` tasks for run `run`, with genome ids that no other call reuses.
  void AddTasks(int64_t run, int count) {
    queue_.Add(Tasks(run, next_id_, count));
    next_id_ += count;
  }

  // Hands out `leases` tasks in calls of `batch` and counts them per run.
  std::map<uint64_t, int> Hand(int leases, uint32_t batch = 1) {
    std::map<uint64_t, int> total;
    for (int done = 0; done < leases;) {
      const uint32_t want =
          std::min<uint32_t>(batch, static_cast<uint32_t>(leases - done));
      std::vector<skerry::v1::Task> got = queue_.Lease(1, want, kNoWait);
      if (got.empty()) break;
      for (const auto& [run, n] : PerRun(got)) total[run] += n;
      done += static_cast<int>(got.size());
    }
    return total;
  }

  // Hands out `leases` tasks one by one, checking the lag bound between runs
  // `a` and `b` (weights `wa`, `wb`) after each.
  std::map<uint64_t, int> HandCheckingLag(int leases, uint64_t a, double wa,
                                          uint64_t b, double wb) {
    std::map<uint64_t, int> total;
    for (int i = 0; i < leases; ++i) {
      std::vector<skerry::v1::Task> got = queue_.Lease(1, 1, kNoWait);
      if (got.empty()) break;
      ++total[got[0].run_id()];
      const double lag = total[a] / wa - total[b] / wb;
      EXPECT_LE(std::abs(lag), 1 / wa + 1 / wb + 1e-9)
          << "after " << i + 1 << " hand-outs: run " << a << " has " << total[a]
          << ", run " << b << " has " << total[b];
    }
    return total;
  }

  FakeClock clock_;
  TaskQueue queue_{&clock_, kLease};
  int64_t next_id_ = 1;
};

TEST_F(TaskQueueShareTest, WeightsOneAndThreeSplitOneToThree) {
  queue_.SetWeight(1, 1);
  queue_.SetWeight(2, 3);
  AddTasks(1, 10000);
  AddTasks(2, 10000);
  std::map<uint64_t, int> got = HandCheckingLag(4000, 1, 1, 2, 3);
  EXPECT_NEAR(got[1], 1000, 1);
  EXPECT_NEAR(got[2], 3000, 1);
  // The same split holds within large leases.
  std::map<uint64_t, int> batched = Hand(4000, /*batch=*/7);
  EXPECT_NEAR(batched[1], 1000, 2);
  EXPECT_NEAR(batched[2], 3000, 2);
}

TEST_F(TaskQueueShareTest, IdleRunsShareGoesToTheOthers) {
  queue_.SetWeight(1, 3);  // weight given, nothing queued yet
  queue_.SetWeight(2, 1);
  AddTasks(2, 1000);
  std::map<uint64_t, int> got = Hand(100);
  EXPECT_EQ(got[1], 0);
  EXPECT_EQ(got[2], 100) << "work conserving: the idle run's share is used";
  AddTasks(1, 1000);
  got = HandCheckingLag(400, 1, 3, 2, 1);
  EXPECT_NEAR(got[1], 300, 1) << "it starts at its share, not above it";
  EXPECT_NEAR(got[2], 100, 1);
}

TEST_F(TaskQueueShareTest, RunWaitingForItsNextGenerationSavesNoCredit) {
  // Run 1 (weight 3) has a small generation: once it is all leased, run 1
  // has nothing to hand out until it breeds the next one.
  queue_.SetWeight(1, 3);
  AddTasks(1, 6);
  AddTasks(2, 10000);
  std::map<uint64_t, int> got = Hand(100);
  EXPECT_EQ(got[1], 6);
  EXPECT_EQ(got[2], 94);
  AddTasks(1, 1000);  // the next generation
  got = HandCheckingLag(400, 1, 3, 2, 1);
  EXPECT_NEAR(got[1], 300, 1);
  EXPECT_NEAR(got[2], 100, 1);
}

TEST_F(TaskQueueShareTest, PausedRunGetsNoBurstWhenResumed) {
  AddTasks(1, 1000);
  AddTasks(2, 1000);
  queue_.SetPaused(1, true);
  std::map<uint64_t, int> got = Hand(500);
  EXPECT_EQ(got[1], 0);
  EXPECT_EQ(got[2], 500);
  queue_.SetPaused(1, false);
  // Without the catch-up rule run 1 would now get 500 in a row.
  got = HandCheckingLag(100, 1, 1, 2, 1);
  EXPECT_NEAR(got[1], 50, 1);
  EXPECT_NEAR(got[2], 50, 1);
}

TEST_F(TaskQueueShareTest, HeldQueueHandsOutNothingAndMovesNoRunAhead) {
  queue_.SetWeight(2, 3);
  AddTasks(1, 1000);
  AddTasks(2, 1000);
  ASSERT_EQ(Hand(40).size(), 2u);
  queue_.SetHeld(true);
  EXPECT_THAT(queue_.Lease(1, 10, kNoWait), IsEmpty());
  queue_.SetHeld(false);
  std::map<uint64_t, int> got = HandCheckingLag(400, 1, 1, 2, 3);
  EXPECT_NEAR(got[1], 100, 1);
  EXPECT_NEAR(got[2], 300, 1);
}

TEST_F(TaskQueueShareTest, HugePopulationDoesNotStarveASmallRun) {
  AddTasks(1, 100000);
  AddTasks(2, 10);
  std::map<uint64_t, int> got = Hand(20);
  EXPECT_EQ(got[2], 10) << "equal weights: the small run is served at once";
  EXPECT_EQ(got[1], 10);
}

TEST_F(TaskQueueShareTest, EvenTheHeaviestWeightLeavesALightRunItsShare) {
  queue_.SetWeight(1, kMaxWeight);
  queue_.SetWeight(2, kMinWeight);
  AddTasks(1, 10000);
  AddTasks(2, 3);
  // One task in kMaxWeight + 1 for run 2, until its three are out.
  std::map<uint64_t, int> got =
      HandCheckingLag(3 * (kMaxWeight + 1), 1, kMaxWeight, 2, kMinWeight);
  EXPECT_EQ(got[2], 3);
}

TEST_F(TaskQueueShareTest, ThreeRunsShareByWeight) {
  queue_.SetWeight(1, 1);
  queue_.SetWeight(2, 2);
  queue_.SetWeight(3, 5);
  AddTasks(1, 10000);
  AddTasks(2, 10000);
  AddTasks(3, 10000);
  std::map<uint64_t, int> got;
  for (int i = 0; i < 8000; ++i) {
    std::vector<skerry::v1::Task> one = queue_.Lease(1, 1, kNoWait);
    ASSERT_EQ(one.size(), 1u);
    ++got[one[0].run_id()];
    // Pairwise lag bounds (see the top of the file).
    ASSERT_LE(std::abs(got[1] / 1.0 - got[2] / 2.0), 1.0 + 0.5 + 1e-9);
    ASSERT_LE(std::abs(got[2] / 2.0 - got[3] / 5.0), 0.5 + 0.2 + 1e-9);
    ASSERT_LE(std::abs(got[1] / 1.0 - got[3] / 5.0), 1.0 + 0.2 + 1e-9);
  }
  EXPECT_NEAR(got[1], 1000, 2);
  EXPECT_NEAR(got[2], 2000, 2);
  EXPECT_NEAR(got[3], 5000, 2);
}

TEST_F(TaskQueueShareTest, WeightChangeAppliesFromTheNextTask) {
  AddTasks(1, 10000);
  AddTasks(2, 10000);
  std::map<uint64_t, int> got = Hand(1000);
  EXPECT_EQ(got[1], 500);
  EXPECT_EQ(got[2], 500);
  queue_.SetWeight(2, 3);
  got = HandCheckingLag(4000, 1, 1, 2, 3);
  EXPECT_NEAR(got[1], 1000, 1);
  EXPECT_NEAR(got[2], 3000, 1);
  queue_.SetWeight(2, 1);  // and back down
  got = HandCheckingLag(1000, 1, 1, 2, 1);
  EXPECT_NEAR(got[1], 500, 2);
  EXPECT_NEAR(got[2], 500, 2);
}

TEST_F(TaskQueueShareTest, WeightsOutsideTheBoundsAreClamped) {
  queue_.SetWeight(1, 0);  // as kMinWeight
  queue_.SetWeight(2, kMinWeight);
  queue_.SetWeight(3, kMaxWeight * 50);  // as kMaxWeight
  queue_.SetWeight(4, kMaxWeight);
  AddTasks(1, 1000);
  AddTasks(2, 1000);
  std::map<uint64_t, int> got = Hand(100);
  EXPECT_EQ(got[1], 50);
  EXPECT_EQ(got[2], 50);
  queue_.RemoveRun(1);
  queue_.RemoveRun(2);
  AddTasks(3, 1000);
  AddTasks(4, 1000);
  got = Hand(100);
  EXPECT_EQ(got[3], 50);
  EXPECT_EQ(got[4], 50);
}

TEST_F(TaskQueueShareTest, RequeuedTasksOfAnEmptiedRunStartAtVirtualNow) {
  // Run 1's only task fails and is queued again (Unclaim) after run 2 had
  // the fleet to itself: run 1 takes its turn, not a run of turns.
  AddTasks(1, 1);
  AddTasks(2, 1000);
  std::vector<skerry::v1::Task> first = queue_.Lease(1, 1, kNoWait);
  ASSERT_EQ(first.size(), 1u);
  ASSERT_EQ(first[0].run_id(), 1u);
  EXPECT_EQ(Hand(300)[2], 300);
  ASSERT_TRUE(queue_.Claim(1, first[0].task_id(), 1, true).has_value());
  queue_.Unclaim({static_cast<int64_t>(first[0].task_id())});
  AddTasks(1, 99);
  std::map<uint64_t, int> got = HandCheckingLag(100, 1, 1, 2, 1);
  EXPECT_NEAR(got[1], 50, 1);
  EXPECT_NEAR(got[2], 50, 1);
}

}  // namespace
}  // namespace skerry::scheduler
