// The one seam for time. Intervals use the monotonic clock; stored timestamps
// use wall time. Tests use FakeClock to move time forward instead of sleeping:
// code that waits for a while (the engine's committer tick) waits through
// Clock::AwaitWithTimeout, which a FakeClock ends when Advance moves its time
// past the deadline.
//
// Thread safety: every Clock may be called from any thread.
#ifndef SKERRY_COMMON_CLOCK_H_
#define SKERRY_COMMON_CLOCK_H_

#include <cstdint>
#include <set>

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
  // The process-wide real clock.
  static Clock* Real();

  // Waits until `cond` holds or `timeout` has passed on this clock; returns
  // whether `cond` holds. Like absl::Mutex::AwaitWithTimeout, `mu` is
  // released while waiting and held again on return.
  virtual bool AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                                absl::Duration timeout)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu) {
    return mu->AwaitWithTimeout(cond, timeout);
  }
};

class FakeClock : public Clock {
 public:
  explicit FakeClock(absl::Time start = absl::UnixEpoch() + absl::Hours(1))
      : now_(start) {}
  absl::Time Now() override {
    absl::MutexLock l(&mu_);
    return now_;
  }
  int64_t WallMillis() override {
    absl::MutexLock l(&mu_);
    return absl::ToUnixMillis(now_);
  }
  // Moves time forward and wakes every AwaitWithTimeout whose deadline it
  // passed.
  void Advance(absl::Duration d) {
    {
      absl::MutexLock l(&mu_);
      now_ += d;
    }
    WakeWaiters();
  }

  // Time passes only by Advance: the wait ends when `cond` holds or Advance
  // has moved the time past now + timeout. (A waiter also looks again every
  // kRecheck of real time, in case a wake-up found its mutex busy.)
  bool AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                        absl::Duration timeout)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu) override;

  // Waits started and not yet ended (tests wait for a thread to be waiting).
  int waiters() {
    absl::MutexLock l(&waiters_mu_);
    return static_cast<int>(waiters_.size());
  }

  static constexpr absl::Duration kRecheck = absl::Milliseconds(50);

 private:
  void WakeWaiters();

  absl::Mutex mu_;
  absl::Time now_ ABSL_GUARDED_BY(mu_);
  // The mutexes of the waits in progress, one entry per wait. Lock order:
  // a waiter's mutex, then waiters_mu_, then mu_.
  absl::Mutex waiters_mu_;
  std::multiset<absl::Mutex*> waiters_ ABSL_GUARDED_BY(waiters_mu_);
};

}  // namespace skerry

#endif  // SKERRY_COMMON_CLOCK_H_
