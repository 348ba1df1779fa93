// The one seam for time. Intervals use the monotonic clock; stored timestamps
// use wall time. Code that waits for a while (a backoff, a report interval, an
// evaluator's time limit) waits through its Clock, so tests drive it with a
// FakeClock and move time forward instead of sleeping or racing it.
//
// Three ways to wait, all measured on the clock:
//   AwaitWithTimeout(mu, cond, d)  like absl::Mutex::AwaitWithTimeout; with a
//                                  FakeClock it returns false only once the
//                                  fake time has been advanced by d.
//   SleepFor(d)                    the same with a condition that never holds.
//   PollSlice(deadline)            for waits on file descriptors (poll(2)):
//                                  the longest real time to block before
//                                  looking at Now() again; zero once the
//                                  deadline has passed.
//
// Thread safety: every Clock may be called from any thread. FakeClock::Advance
// wakes every waiter whose deadline it passes, whatever mutex it waits on.
#ifndef SKERRY_COMMON_CLOCK_H_
#define SKERRY_COMMON_CLOCK_H_

#include <atomic>
#include <cstdint>
#include <map>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"

namespace skerry {

class Clock {
 public:
  virtual ~Clock() = default;
  // Monotonic: for deadlines and intervals.
  virtual absl::Time Now() = 0;
  // Wall time in milliseconds since the Unix epoch: for stored timestamps.
  virtual int64_t WallMillis() = 0;
  // With *mu held: waits until cond holds (true) or `timeout` has passed on
  // this clock (false). mu is released while waiting, as absl's Await does.
  virtual bool AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                                absl::Duration timeout)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu) = 0;
  // Real time to block in poll(2) before looking at Now() again, for a wait
  // that ends at `deadline` on this clock; zero when the deadline has passed.
  virtual absl::Duration PollSlice(absl::Time deadline) = 0;
  // Sleeps for d on this clock.
  void SleepFor(absl::Duration d);
  // The process-wide real clock.
  static Clock* Real();
};

class FakeClock : public Clock {
 public:
  // The real time a PollSlice may block: fake time moves only when a test
  // advances it, so file-descriptor waits look at it this often.
  static constexpr absl::Duration kPollSlice = absl::Milliseconds(5);

  explicit FakeClock(absl::Time start = absl::UnixEpoch() + absl::Hours(1))
      : now_ns_(absl::ToUnixNanos(start)) {}
  absl::Time Now() override {
    return absl::FromUnixNanos(now_ns_.load(std::memory_order_acquire));
  }
  int64_t WallMillis() override { return absl::ToUnixMillis(Now()); }
  bool AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                        absl::Duration timeout) override
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu);
  absl::Duration PollSlice(absl::Time deadline) override;
  // Moves time forward and wakes every waiter whose deadline has come.
  void Advance(absl::Duration d);
  // Waits (real time, at most `limit`) until at least n threads wait in
  // AwaitWithTimeout or SleepFor on this clock. False on timeout.
  bool AwaitWaiters(int n, absl::Duration limit = absl::Seconds(30));
  int waiters();

 private:
  std::atomic<int64_t> now_ns_;
  absl::Mutex waiters_mu_;
  // The mutexes waiters wait on, with how many wait on each.
  std::map<absl::Mutex*, int> waiting_ ABSL_GUARDED_BY(waiters_mu_);
  int waiter_count_ ABSL_GUARDED_BY(waiters_mu_) = 0;
};

}  // namespace skerry

#endif  // SKERRY_COMMON_CLOCK_H_
