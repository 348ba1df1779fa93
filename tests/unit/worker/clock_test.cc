// The Clock seam (common/clock.h): FakeClock moves only when told, and
// Advance wakes every waiter whose time has come, whatever mutex it waits
// on; a condition still wakes a fake waiter at once.
#include "common/clock.h"

#include <thread>

#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

TEST(FakeClockTest, AdvanceWakesAWaiterWhoseTimeHasCome) {
  FakeClock clock;
  absl::Mutex mu;
  bool never = false;
  bool timed_out = false;
  std::thread waiter([&] {
    absl::MutexLock l(&mu);
    timed_out = !clock.AwaitWithTimeout(&mu, absl::Condition(&never),
                                        absl::Seconds(10));
  });
  ASSERT_TRUE(clock.AwaitWaiters(1));
  clock.Advance(absl::Seconds(9));
  // Still waiting: ten seconds have not passed on the clock.
  EXPECT_EQ(clock.waiters(), 1);
  clock.Advance(absl::Seconds(1));
  waiter.join();
  EXPECT_TRUE(timed_out);
  EXPECT_EQ(clock.waiters(), 0);
}

TEST(FakeClockTest, ConditionWakesAFakeWaiterWithoutTimeMoving) {
  FakeClock clock;
  absl::Mutex mu;
  bool ready = false;
  bool woken_by_condition = false;
  std::thread waiter([&] {
    absl::MutexLock l(&mu);
    woken_by_condition =
        clock.AwaitWithTimeout(&mu, absl::Condition(&ready), absl::Hours(1));
  });
  ASSERT_TRUE(clock.AwaitWaiters(1));
  {
    absl::MutexLock l(&mu);
    ready = true;
  }
  waiter.join();
  EXPECT_TRUE(woken_by_condition);
}

TEST(FakeClockTest, SleepForEndsWhenTheClockHasMoved) {
  FakeClock clock;
  const absl::Time start = clock.Now();
  std::thread sleeper([&] { clock.SleepFor(absl::Minutes(3)); });
  ASSERT_TRUE(clock.AwaitWaiters(1));
  clock.Advance(absl::Minutes(3));
  sleeper.join();
  EXPECT_EQ(clock.Now() - start, absl::Minutes(3));
}

TEST(FakeClockTest, PollSliceIsShortUntilTheDeadlineThenZero) {
  FakeClock clock;
  const absl::Time deadline = clock.Now() + absl::Hours(1);
  EXPECT_EQ(clock.PollSlice(deadline), FakeClock::kPollSlice);
  clock.Advance(absl::Hours(1));
  EXPECT_EQ(clock.PollSlice(deadline), absl::ZeroDuration());
}

TEST(RealClockTest, PollSliceIsTheTimeLeft) {
  Clock* clock = Clock::Real();
  EXPECT_EQ(clock->PollSlice(clock->Now() - absl::Seconds(1)),
            absl::ZeroDuration());
  EXPECT_GT(clock->PollSlice(clock->Now() + absl::Hours(1)), absl::Minutes(59));
}

}  // namespace
}  // namespace skerry
