// Tests for the task queue (server/scheduler/task_queue.h): leases and their
// expiry on a fake clock, renewal, the result rule of Claim, pausing, equal
// shares across runs of equal weight, and the long poll. Weighted shares are
// tested in task_queue_share_test.cc.
#include "server/scheduler/task_queue.h"

#include <map>
#include <memory>
#include <set>
#include <thread>
#include <vector>

#include "absl/time/time.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/server/task_queue_test_util.h"

namespace skerry::scheduler {
namespace {

using ::skerry::scheduler::testing::Ids;
using ::skerry::scheduler::testing::PerRun;
using ::skerry::scheduler::testing::Tasks;
using ::testing::ElementsAre;
using ::testing::IsEmpty;

constexpr absl::Duration kLease = absl::Seconds(10);
constexpr absl::Duration kNoWait = absl::ZeroDuration();

class TaskQueueTest : public ::testing::Test {
 protected:
  FakeClock clock_;
  TaskQueue queue_{&clock_, kLease};
};

TEST_F(TaskQueueTest, LeaseCarriesEverythingNeededToEvaluate) {
  queue_.Add(Tasks(7, 100, 1));
  std::vector<skerry::v1::Task> got = queue_.Lease(1, 10, kNoWait);
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0].task_id(), 100u);
  EXPECT_EQ(got[0].run_id(), 7u);
  EXPECT_EQ(got[0].attempt(), 1u);
  EXPECT_THAT(got[0].genes(), ElementsAre(0.0, -1.0));
  EXPECT_EQ(got[0].eval_seed(), 1100u);
  EXPECT_EQ(got[0].evaluator().builtin().function(), "sphere");
}

TEST_F(TaskQueueTest, LeasedTasksAreNotOfferedTwice) {
  queue_.Add(Tasks(1, 1, 5));
  std::vector<skerry::v1::Task> first = queue_.Lease(1, 3, kNoWait);
  std::vector<skerry::v1::Task> second = queue_.Lease(2, 10, kNoWait);
  std::vector<skerry::v1::Task> third = queue_.Lease(3, 10, kNoWait);
  EXPECT_THAT(Ids(first), ElementsAre(1, 2, 3));
  EXPECT_THAT(Ids(second), ElementsAre(4, 5));
  EXPECT_THAT(third, IsEmpty());
  const TaskQueue::Counts c = queue_.counts();
  EXPECT_EQ(c.queued, 0u);
  EXPECT_EQ(c.leased, 5u);
}

// The split among workers (task_queue.h; guided self-scheduling weighted by
// what each worker asks for and holds). Regression (issue 14, the fleet's
// tail): the first worker to ask for a generation took all of it, up to its
// batch, and the other waited; at 20 ms evaluations the fleet lost 4% to it.
TEST_F(TaskQueueTest, AGenerationIsSplitByWhatEachWorkerAsksAndHolds) {
  // Both workers are polling (asking with nothing queued) when it comes.
  EXPECT_THAT(queue_.Lease(1, 100, kNoWait), IsEmpty());
  EXPECT_THAT(queue_.Lease(2, 100, kNoWait), IsEmpty());
  queue_.Add(Tasks(1, 1, 101));
  const std::vector<skerry::v1::Task> first = queue_.Lease(1, 100, kNoWait);
  EXPECT_EQ(first.size(), 51u);  // ceil(101 x 100 / 200)
  const std::vector<skerry::v1::Task> second = queue_.Lease(2, 100, kNoWait);
  EXPECT_EQ(second.size(), 50u);  // its share: the rest
  // Asking again while holding its share gets at least one, if any is left.
  EXPECT_THAT(queue_.Lease(1, 100, kNoWait), IsEmpty());

  // As a generation drains, a worker that finished gets half of what is left
  // beside what the other holds: the chunks shrink.
  std::vector<int64_t> done;
  for (const skerry::v1::Task& t : second) {
    ASSERT_TRUE(queue_.Claim(2, t.task_id(), t.attempt(), false).has_value());
    done.push_back(static_cast<int64_t>(t.task_id()));
  }
  queue_.Complete(done);
  queue_.Add(Tasks(1, 1000, 49));
  // Holding 51 of the 100 to share, worker 1 gets nothing more than one...
  EXPECT_EQ(queue_.Lease(1, 100, kNoWait).size(), 1u);
  // ...and worker 2, holding none, its 50 less nothing: all 48 left.
  EXPECT_EQ(queue_.Lease(2, 100, kNoWait).size(), 48u);
}

TEST_F(TaskQueueTest, TheSplitFollowsWhatEachWorkerAsksForAndForgetsTheGone) {
  EXPECT_THAT(queue_.Lease(1, 300, kNoWait),
              IsEmpty());  // three threads' batch
  EXPECT_THAT(queue_.Lease(2, 100, kNoWait), IsEmpty());
  queue_.Add(Tasks(1, 1, 100));
  EXPECT_EQ(queue_.Lease(1, 300, kNoWait).size(), 75u);
  EXPECT_EQ(queue_.Lease(2, 100, kNoWait).size(), 25u);

  // Worker 2 stops asking: after one lease period it is out of the split,
  // and a lone worker gets everything it asks for.
  clock_.Advance(kLease + absl::Seconds(1));  // the leases expire too
  EXPECT_EQ(queue_.Lease(1, 300, kNoWait).size(), 100u);

  // A worker that left (HandBack with all_held) is out at once.
  queue_.Add(Tasks(1, 500, 10));
  // 10 queued and worker 1's 100 held: ceil(110 x 5 / 305) = 2.
  EXPECT_THAT(queue_.Lease(3, 5, kNoWait), ::testing::SizeIs(2));
  queue_.HandBack(3, {}, /*all_held=*/true);
  EXPECT_EQ(queue_.Lease(1, 300, kNoWait).size(), 10u);
}

TEST_F(TaskQueueTest, AddingAKnownGenomeIsIgnored) {
  queue_.Add(Tasks(1, 1, 2));
  queue_.Add(Tasks(1, 1, 3));  // 1 and 2 again, 3 new
  EXPECT_EQ(queue_.counts().queued, 3u);
  EXPECT_THAT(Ids(queue_.Lease(1, 10, kNoWait)), ElementsAre(1, 2, 3));
}

TEST_F(TaskQueueTest, ExpiredLeaseIsOfferedAgain) {
  queue_.Add(Tasks(1, 1, 2));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);  // task 1
  clock_.Advance(kLease - absl::Seconds(1));
  EXPECT_THAT(Ids(queue_.Lease(2, 10, kNoWait)), ElementsAre(2));
  clock_.Advance(absl::Seconds(2));  // task 1's lease has expired, not task 2's
  std::vector<skerry::v1::Task> again = queue_.Lease(3, 10, kNoWait);
  ASSERT_EQ(again.size(), 1u);
  EXPECT_EQ(again[0].task_id(), 1u);
  EXPECT_EQ(again[0].attempt(), 2u);
}

TEST_F(TaskQueueTest, AttemptsIncreaseWithEveryLease) {
  queue_.Add(Tasks(1, 1, 1));
  for (uint32_t attempt = 1; attempt <= 4; ++attempt) {
    std::vector<skerry::v1::Task> got = queue_.Lease(attempt, 1, kNoWait);
    ASSERT_EQ(got.size(), 1u) << "attempt " << attempt;
    EXPECT_EQ(got[0].attempt(), attempt);
    clock_.Advance(kLease + absl::Seconds(1));
  }
}

TEST_F(TaskQueueTest, AttemptsContinueFromTheStoredCount) {
  std::vector<TaskInfo> tasks = Tasks(1, 1, 1);
  tasks[0].attempts = 2;  // two leases made by an earlier coordinator
  queue_.Add(std::move(tasks));
  std::vector<skerry::v1::Task> got = queue_.Lease(1, 1, kNoWait);
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0].attempt(), 3u);
}

TEST_F(TaskQueueTest, RenewExtendsTheDeadlineForTheHolderOnly) {
  queue_.Add(Tasks(1, 1, 2));
  ASSERT_THAT(Ids(queue_.Lease(1, 1, kNoWait)), ElementsAre(1));
  ASSERT_THAT(Ids(queue_.Lease(2, 1, kNoWait)), ElementsAre(2));
  clock_.Advance(absl::Seconds(6));
  queue_.Renew(1, {1});  // the holder renews its task: deadline now 16 s
  queue_.Renew(1, {2});  // task 2 is held by worker 2: no effect
  clock_.Advance(absl::Seconds(5));  // 11 s: only task 2's lease has expired
  std::vector<skerry::v1::Task> got = queue_.Lease(3, 10, kNoWait);
  EXPECT_THAT(Ids(got), ElementsAre(2));
  clock_.Advance(absl::Seconds(6));  // 17 s: task 1's renewed lease expires
  EXPECT_THAT(Ids(queue_.Lease(3, 10, kNoWait)), ElementsAre(1));
}

// ---- Claim: the result rule ----

TEST_F(TaskQueueTest, SuccessFromTheHolderIsClaimed) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  std::optional<TaskInfo> info =
      queue_.Claim(1, 1, 1, /*failed_attempt=*/false);
  ASSERT_TRUE(info.has_value());
  EXPECT_EQ(info->genome_id, 1);
  EXPECT_EQ(info->attempts, 1u);
  EXPECT_EQ(queue_.counts().claimed, 1u);
  EXPECT_EQ(queue_.counts().leased, 0u);
}

TEST_F(TaskQueueTest, SuccessFromAStaleHolderIsAcceptedWhileLeasedToAnother) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  clock_.Advance(kLease + absl::Seconds(1));
  ASSERT_EQ(queue_.Lease(2, 1, kNoWait).size(), 1u);  // attempt 2, worker 2
  std::optional<TaskInfo> info =
      queue_.Claim(1, 1, 1, /*failed_attempt=*/false);
  EXPECT_TRUE(info.has_value());
  // Worker 2's result is now a duplicate.
  EXPECT_FALSE(queue_.Claim(2, 1, 2, false).has_value());
}

TEST_F(TaskQueueTest, SuccessFromAnExpiredLeaseIsAcceptedWhileQueued) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  clock_.Advance(kLease + absl::Seconds(1));
  // Expired leases are re-queued by the next Lease call; with the run paused
  // that call hands nothing out, so the task is left queued.
  queue_.SetPaused(1, true);
  ASSERT_THAT(queue_.Lease(2, 1, kNoWait), IsEmpty());
  ASSERT_EQ(queue_.counts().queued, 1u);
  std::optional<TaskInfo> info =
      queue_.Claim(1, 1, 1, /*failed_attempt=*/false);
  EXPECT_TRUE(info.has_value());
  EXPECT_EQ(queue_.counts().queued, 0u);
  // Claimed while queued: it is not handed out any more.
  queue_.SetPaused(1, false);
  EXPECT_THAT(queue_.Lease(3, 10, kNoWait), IsEmpty());
}

TEST_F(TaskQueueTest, FailureFromAnExpiredLeaseIsIgnoredWhileQueued) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  clock_.Advance(kLease + absl::Seconds(1));
  queue_.SetPaused(1, true);
  ASSERT_THAT(queue_.Lease(2, 1, kNoWait), IsEmpty());
  EXPECT_FALSE(queue_.Claim(1, 1, 1, /*failed_attempt=*/true).has_value());
  EXPECT_EQ(queue_.counts().queued, 1u);
}

TEST_F(TaskQueueTest, FailureFromAStaleLeaseIsIgnored) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  clock_.Advance(kLease + absl::Seconds(1));
  ASSERT_EQ(queue_.Lease(2, 1, kNoWait).size(), 1u);  // attempt 2, worker 2
  EXPECT_FALSE(queue_.Claim(1, 1, 1, /*failed_attempt=*/true).has_value())
      << "old holder, old attempt";
  EXPECT_FALSE(queue_.Claim(1, 1, 2, true).has_value()) << "old holder";
  EXPECT_FALSE(queue_.Claim(2, 1, 1, true).has_value()) << "old attempt";
  EXPECT_EQ(queue_.counts().leased, 1u) << "the current lease is untouched";
  EXPECT_TRUE(queue_.Claim(2, 1, 2, true).has_value()) << "current lease";
}

TEST_F(TaskQueueTest, FailureForAQueuedTaskIsIgnored) {
  queue_.Add(Tasks(1, 1, 1));
  EXPECT_FALSE(queue_.Claim(1, 1, 0, /*failed_attempt=*/true).has_value());
  EXPECT_EQ(queue_.counts().queued, 1u);
}

TEST_F(TaskQueueTest, ClaimedTaskIsNotClaimableTwice) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  ASSERT_TRUE(queue_.Claim(1, 1, 1, false).has_value());
  EXPECT_FALSE(queue_.Claim(1, 1, 1, false).has_value());
  EXPECT_FALSE(queue_.Claim(1, 1, 1, true).has_value());
  EXPECT_FALSE(queue_.Claim(2, 1, 1, false).has_value());
}

// Results of an earlier coordinator's leases were refused after a restart
// (its lease memory died with it) and evaluated again. A lease shown by its
// proof (FleetService checks it) is noted, and its result is taken once.
TEST_F(TaskQueueTest, NotedLeaseOfAnEarlierProcessIsTakenOnce) {
  queue_.Add(Tasks(1, 1, 1));  // rebuilt after a restart: queued, no holders
  absl::Status why;
  EXPECT_FALSE(queue_.Claim(7, 1, 1, /*failed_attempt=*/false, &why));
  EXPECT_TRUE(absl::IsPermissionDenied(why)) << why;
  queue_.NoteLease(7, 1, 1);
  queue_.NoteLease(7, 1, 1);  // twice: nothing more
  EXPECT_FALSE(queue_.Claim(8, 1, 1, false)) << "another worker";
  EXPECT_FALSE(queue_.Claim(7, 1, 2, false)) << "another attempt";
  std::optional<TaskInfo> info = queue_.Claim(7, 1, 1, false);
  ASSERT_TRUE(info.has_value());
  queue_.Complete({1});
  EXPECT_FALSE(queue_.Claim(7, 1, 1, false)) << "taken once";
  EXPECT_THAT(queue_.Lease(9, 10, kNoWait), IsEmpty());
  queue_.NoteLease(7, 99, 1);  // an unknown task: nothing happens
  EXPECT_EQ(queue_.counts().queued, 0u);
}

// Issue 11: any worker could store any finite score for any pending genome.
TEST_F(TaskQueueTest, ScoreFromAWorkerNotHoldingTheLeaseIsRefused) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);  // worker 1, attempt 1
  absl::Status why;
  EXPECT_FALSE(queue_.Claim(2, 1, 1, /*failed_attempt=*/false, &why))
      << "another worker's lease";
  EXPECT_TRUE(absl::IsPermissionDenied(why)) << why;
  EXPECT_NE(why.message().find("not leased to worker 2"), std::string::npos)
      << why;
  EXPECT_FALSE(queue_.Claim(1, 1, 2, false)) << "an attempt never handed out";
  EXPECT_EQ(queue_.counts().leased, 1u) << "the holder's lease is untouched";
  EXPECT_TRUE(queue_.Claim(1, 1, 1, false)) << "the holder";
}

TEST_F(TaskQueueTest, ScoreForATaskNeverLeasedIsRefused) {
  queue_.Add(Tasks(1, 1, 1));
  absl::Status why;
  for (uint32_t attempt : {0u, 1u}) {
    EXPECT_FALSE(queue_.Claim(1, 1, attempt, /*failed_attempt=*/false, &why));
    EXPECT_TRUE(absl::IsPermissionDenied(why)) << why;
  }
  EXPECT_EQ(queue_.counts().queued, 1u);
}

TEST_F(TaskQueueTest, LateScoreFromAnyEarlierHolderIsAccepted) {
  queue_.Add(Tasks(1, 1, 1));
  for (int64_t worker = 1; worker <= 3; ++worker) {
    ASSERT_EQ(queue_.Lease(worker, 1, kNoWait).size(), 1u);
    clock_.Advance(kLease + absl::Seconds(1));  // each lease expires
  }
  // Worker 2 held attempt 2 only.
  EXPECT_FALSE(queue_.Claim(2, 1, 1, false)) << "attempt 1 was worker 1's";
  EXPECT_FALSE(queue_.Claim(2, 1, 3, false)) << "attempt 3 was worker 3's";
  EXPECT_TRUE(queue_.Claim(2, 1, 2, false)) << "its own, late";
}

TEST_F(TaskQueueTest, OnlyTheLastLeasesOfATaskAreRemembered) {
  queue_.Add(Tasks(1, 1, 1));
  for (size_t i = 0; i <= kMaxHoldersKept; ++i) {
    ASSERT_EQ(queue_.Lease(static_cast<int64_t>(100 + i), 1, kNoWait).size(),
              1u);
    clock_.Advance(kLease + absl::Seconds(1));
  }
  EXPECT_FALSE(queue_.Claim(100, 1, 1, false)) << "forgotten, refused";
  EXPECT_TRUE(queue_.Claim(101, 1, 2, false));
}

TEST_F(TaskQueueTest, LeaseStopsBeforeTheAnswerOutgrowsItsByteBudget) {
  queue_.Add(Tasks(1, 1, 10));
  const std::vector<skerry::v1::Task> one = queue_.Lease(1, 1, kNoWait);
  ASSERT_EQ(one.size(), 1u);
  const size_t task_bytes = one[0].ByteSizeLong();
  // A budget of three and a half tasks (by the queue's upper estimate,
  // which is at least the encoded size) gives at most three.
  std::vector<skerry::v1::Task> got =
      queue_.Lease(1, 100, kNoWait, task_bytes * 3 + task_bytes / 2 + 200);
  EXPECT_GE(got.size(), 1u);
  EXPECT_LE(got.size(), 3u);
  // However small the budget, one task is handed out.
  EXPECT_EQ(queue_.Lease(1, 100, kNoWait, 1).size(), 1u);
  EXPECT_EQ(queue_.counts().queued, 10u - 1u - got.size() - 1u);
}

TEST_F(TaskQueueTest, UnknownTaskIsNotClaimed) {
  EXPECT_FALSE(queue_.Claim(1, 12345, 1, false).has_value());
}

TEST_F(TaskQueueTest, UnclaimQueuesTheTaskAgain) {
  queue_.Add(Tasks(1, 1, 2));
  ASSERT_THAT(Ids(queue_.Lease(1, 1, kNoWait)), ElementsAre(1));
  ASSERT_TRUE(queue_.Claim(1, 1, 1, true).has_value());
  queue_.Unclaim({1});
  EXPECT_EQ(queue_.counts().queued, 2u);
  EXPECT_EQ(queue_.counts().claimed, 0u);
  // Re-queued at the front, with the next attempt number.
  std::vector<skerry::v1::Task> got = queue_.Lease(2, 1, kNoWait);
  ASSERT_EQ(got.size(), 1u);
  EXPECT_EQ(got[0].task_id(), 1u);
  EXPECT_EQ(got[0].attempt(), 2u);
}

TEST_F(TaskQueueTest, CompleteForgetsTheTask) {
  queue_.Add(Tasks(1, 1, 1));
  ASSERT_EQ(queue_.Lease(1, 1, kNoWait).size(), 1u);
  ASSERT_TRUE(queue_.Claim(1, 1, 1, false).has_value());
  queue_.Complete({1});
  const TaskQueue::Counts c = queue_.counts();
  EXPECT_EQ(c.queued + c.leased + c.claimed, 0u);
  EXPECT_FALSE(queue_.Claim(1, 1, 1, false).has_value());
  clock_.Advance(kLease * 3);
  EXPECT_THAT(queue_.Lease(1, 10, kNoWait), IsEmpty());
}

TEST_F(TaskQueueTest, CompleteIgnoresTasksThatAreNotClaimed) {
  queue_.Add(Tasks(1, 1, 2));
  ASSERT_THAT(Ids(queue_.Lease(1, 1, kNoWait)), ElementsAre(1));
  queue_.Complete({1, 2});
  EXPECT_EQ(queue_.counts().leased, 1u);
  EXPECT_EQ(queue_.counts().queued, 1u);
}

// ---- Removal, pausing, fairness ----

TEST_F(TaskQueueTest, RemovedTasksAreNotOffered) {
  queue_.Add(Tasks(1, 1, 3));
  queue_.Add(Tasks(2, 10, 2));
  ASSERT_THAT(Ids(queue_.Lease(1, 1, kNoWait)), ElementsAre(1));
  queue_.Remove({1, 2});
  queue_.RemoveRun(2);
  EXPECT_THAT(Ids(queue_.Lease(1, 10, kNoWait)), ElementsAre(3));
  queue_.Remove({3});  // a leased task: its lease goes with it
  clock_.Advance(kLease * 2);
  EXPECT_THAT(queue_.Lease(1, 10, kNoWait), IsEmpty());
  EXPECT_FALSE(queue_.Claim(1, 1, 1, false).has_value());
}

TEST_F(TaskQueueTest, PausedRunsAreNotLeased) {
  queue_.Add(Tasks(1, 1, 2));
  queue_.Add(Tasks(2, 10, 2));
  queue_.SetPaused(1, true);
  EXPECT_THAT(Ids(queue_.Lease(1, 10, kNoWait)), ElementsAre(10, 11));
  EXPECT_THAT(queue_.Lease(1, 10, kNoWait), IsEmpty());
  EXPECT_EQ(queue_.counts().queued, 2u) << "a paused run's tasks stay queued";
  queue_.SetPaused(1, false);
  EXPECT_THAT(Ids(queue_.Lease(1, 10, kNoWait)), ElementsAre(1, 2));
}

TEST_F(TaskQueueTest, PausedRunWithWaitReturnsEmptyAfterTheWait) {
  queue_.Add(Tasks(1, 1, 2));
  queue_.SetPaused(1, true);
  EXPECT_THAT(queue_.Lease(1, 10, absl::Milliseconds(20)), IsEmpty());
}

TEST_F(TaskQueueTest, EqualWeightsServeASmallRunBesideAHugeOne) {
  queue_.Add(Tasks(1, 1, 100));
  queue_.Add(Tasks(2, 1000, 2));
  std::vector<skerry::v1::Task> got = queue_.Lease(1, 4, kNoWait);
  ASSERT_EQ(got.size(), 4u);
  std::map<uint64_t, int> per_run = PerRun(got);
  EXPECT_EQ(per_run[1], 2);
  EXPECT_EQ(per_run[2], 2);
  // Once the small run is drained, the big one gets everything.
  std::vector<skerry::v1::Task> rest = queue_.Lease(1, 10, kNoWait);
  ASSERT_EQ(rest.size(), 10u);
  for (const skerry::v1::Task& t : rest) EXPECT_EQ(t.run_id(), 1u);
}

TEST_F(TaskQueueTest, EqualSharesContinueAcrossLeaseCalls) {
  queue_.Add(Tasks(1, 1, 10));
  queue_.Add(Tasks(2, 100, 10));
  queue_.Add(Tasks(3, 200, 10));
  std::map<uint64_t, int> per_run;
  for (int i = 0; i < 6; ++i) {
    std::vector<skerry::v1::Task> got = queue_.Lease(1, 1, kNoWait);
    ASSERT_EQ(got.size(), 1u);
    ++per_run[got[0].run_id()];
  }
  EXPECT_EQ(per_run[1], 2);
  EXPECT_EQ(per_run[2], 2);
  EXPECT_EQ(per_run[3], 2);
}

TEST_F(TaskQueueTest, ZeroMaxTasksLeasesNothing) {
  queue_.Add(Tasks(1, 1, 2));
  EXPECT_THAT(queue_.Lease(1, 0, absl::Seconds(30)), IsEmpty());
  EXPECT_EQ(queue_.counts().queued, 2u);
}

// ---- The long poll ----

TEST_F(TaskQueueTest,
       LeaseWithWaitReturnsEmptyAfterTheWaitWhenNothingIsQueued) {
  EXPECT_THAT(queue_.Lease(1, 10, absl::Milliseconds(30)), IsEmpty());
}

TEST_F(TaskQueueTest, WaitingLeaseWakesWhenATaskArrives) {
  std::vector<skerry::v1::Task> got;
  std::thread waiter([&] { got = queue_.Lease(1, 10, absl::Seconds(30)); });
  queue_.Add(Tasks(1, 1, 1));
  waiter.join();
  // Either the waiter saw the task or it gave up after 30 s; only the first is
  // plausible, but no time is asserted.
  EXPECT_THAT(Ids(got), ElementsAre(1));
}

TEST_F(TaskQueueTest, WaitingLeaseReturnsWhenShutdownIsCalled) {
  std::vector<skerry::v1::Task> got;
  std::thread waiter([&] { got = queue_.Lease(1, 10, absl::Seconds(30)); });
  queue_.Shutdown();
  waiter.join();
  EXPECT_THAT(got, IsEmpty());
  // Later calls return at once, even with work queued.
  queue_.Add(Tasks(1, 1, 1));
  EXPECT_THAT(queue_.Lease(1, 10, absl::Seconds(30)), IsEmpty());
}

// HandBack: a leaving worker's tasks go back at once, before the rest of
// the queue, and the hand-back is not counted as an attempt.
TEST_F(TaskQueueTest, HandedBackTasksAreLeasedAgainAtOnceWithTheSameAttempt) {
  queue_.Add(Tasks(1, 1, 4));
  ASSERT_EQ(queue_.Lease(1, 2, kNoWait).size(), 2u);  // tasks 1, 2 to worker 1
  ASSERT_EQ(queue_.Lease(2, 1, kNoWait).size(), 1u);  // task 3 to worker 2
  // Task 3 is not worker 1's, task 9 is unknown: both left alone.
  EXPECT_EQ(queue_.HandBack(1, {1, 3, 9}, /*all_held=*/false), 1u);
  EXPECT_EQ(queue_.HandBack(1, {}, /*all_held=*/true), 1u);  // task 2
  std::vector<skerry::v1::Task> again = queue_.Lease(3, 10, kNoWait);
  EXPECT_THAT(Ids(again), ElementsAre(2, 1, 4));
  for (const skerry::v1::Task& t : again) EXPECT_EQ(t.attempt(), 1u);
  EXPECT_EQ(queue_.counts().leased, 4u);
}

// Regression: a worker that left had a long poll still waiting at the
// coordinator (its caller had cancelled it); that call took the tasks the
// worker had just handed back, for a whole lease.
TEST_F(TaskQueueTest, ALeftWorkersWaitingLeaseTakesNothing) {
  queue_.Add(Tasks(1, 1, 2));
  ASSERT_EQ(queue_.Lease(1, 2, kNoWait).size(), 2u);
  std::vector<skerry::v1::Task> forgotten;
  std::thread waiting(
      [&] { forgotten = queue_.Lease(1, 10, absl::Seconds(30)); });
  EXPECT_EQ(queue_.HandBack(1, {1, 2}, /*all_held=*/true), 2u);
  waiting.join();
  EXPECT_THAT(forgotten, IsEmpty());
  EXPECT_THAT(Ids(queue_.Lease(2, 10, kNoWait)), ElementsAre(2, 1));
}

}  // namespace
}  // namespace skerry::scheduler
