#include "common/clock.h"

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
};

}  // namespace

Clock* Clock::Real() {
  static RealClock* clock = new RealClock();
  return clock;
}

bool FakeClock::AwaitWithTimeout(absl::Mutex* mu, const absl::Condition& cond,
                                 absl::Duration timeout) {
  const absl::Time deadline = Now() + timeout;
  {
    absl::MutexLock l(&waiters_mu_);
    waiters_.insert(mu);
  }
  struct Wake {
    const absl::Condition* cond;
    FakeClock* clock;
    absl::Time deadline;
    bool operator()() const { return cond->Eval() || clock->Now() >= deadline; }
  } wake{&cond, this, deadline};
  while (!mu->AwaitWithTimeout(absl::Condition(&wake), kRecheck)) {
  }
  {
    absl::MutexLock l(&waiters_mu_);
    waiters_.erase(waiters_.find(mu));
  }
  return cond.Eval();
}

void FakeClock::WakeWaiters() {
  // absl::Mutex evaluates its waiters' conditions when it is released: lock
  // and release each waiter's mutex. A busy one needs nothing: its holder's
  // release does the same. TryLock never blocks, so waiters_mu_ (which a
  // waiter takes while holding its mutex) cannot deadlock with it, and
  // holding waiters_mu_ keeps every listed mutex alive.
  absl::MutexLock l(&waiters_mu_);
  for (absl::Mutex* m : waiters_) {
    if (m->TryLock()) m->Unlock();
  }
}

}  // namespace skerry
