#include "common/clock.h"

#include <algorithm>
#include <chrono>

namespace skerry {
namespace {

class RealClock : public Clock {
 public:
  absl::Time Now() override {
    // steady_clock mapped onto absl::Time: only differences are meaningful.
    const auto ns = std::chrono::duration_cast<std::chrono::nanoseconds>(
                        std::chrono::steady_clock::now().time_since_epoch())
                        .count();
    return absl::UnixEpoch() + absl::Nanoseconds(ns);
  }
  int64_t WallMillis() override { return absl::ToUnixMillis(absl::Now()); }
  bool AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                        absl::Duration timeout) override
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu) {
    return mu->AwaitWithTimeout(cond, timeout);
  }
  absl::Duration PollSlice(absl::Time deadline) override {
    return std::max(absl::ZeroDuration(), deadline - Now());
  }
};

// A fake waiter wakes when its condition holds or the fake time reaches its
// deadline.
struct FakeWait {
  FakeClock* clock;
  const absl::Condition* cond;
  absl::Time deadline;
  bool Done() const { return clock->Now() >= deadline || cond->Eval(); }
};

}  // namespace

void Clock::SleepFor(absl::Duration d) {
  static const bool kNever = false;
  absl::Mutex mu;
  absl::MutexLock l(&mu);
  AwaitWithTimeout(&mu, absl::Condition(&kNever), d);
}

Clock* Clock::Real() {
  static RealClock* clock = new RealClock();
  return clock;
}

bool FakeClock::AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                                 absl::Duration timeout) {
  FakeWait wait{this, &cond, Now() + timeout};
  {
    // Lock order: the waiter's mutex, then waiters_mu_. Advance never blocks
    // on a waiter's mutex (TryLock), so the reverse order cannot deadlock.
    absl::MutexLock l(&waiters_mu_);
    ++waiting_[mu];
    ++waiter_count_;
  }
  mu->Await(absl::Condition(&wait, &FakeWait::Done));
  {
    absl::MutexLock l(&waiters_mu_);
    if (--waiting_[mu] == 0) waiting_.erase(mu);
    --waiter_count_;
  }
  return cond.Eval();
}

absl::Duration FakeClock::PollSlice(absl::Time deadline) {
  return Now() >= deadline ? absl::ZeroDuration() : kPollSlice;
}

void FakeClock::Advance(absl::Duration d) {
  now_ns_.fetch_add(absl::ToInt64Nanoseconds(d), std::memory_order_acq_rel);
  absl::MutexLock l(&waiters_mu_);
  for (const auto& [mu, n] : waiting_) {
    // Releasing a mutex makes absl re-evaluate its waiters' conditions. A
    // mutex held by someone else is re-evaluated when they release it, and
    // they will see the new time then.
    if (mu->TryLock()) mu->Unlock();
  }
}

bool FakeClock::AwaitWaiters(int n, absl::Duration limit) {
  absl::MutexLock l(&waiters_mu_);
  auto enough = [this, n]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(waiters_mu_) {
    return waiter_count_ >= n;
  };
  return waiters_mu_.AwaitWithTimeout(absl::Condition(&enough), limit);
}

int FakeClock::waiters() {
  absl::MutexLock l(&waiters_mu_);
  return waiter_count_;
}

}  // namespace skerry
