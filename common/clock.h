// The one seam for time. Intervals use the monotonic clock; stored timestamps
// use wall time. Tests use FakeClock to move time forward instead of sleeping.
//
// Thread safety: every Clock may be called from any thread.
#ifndef SKERRY_COMMON_CLOCK_H_
#define SKERRY_COMMON_CLOCK_H_

#include <cstdint>

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
  void Advance(absl::Duration d) {
    absl::MutexLock l(&mu_);
    now_ += d;
  }

 private:
  absl::Mutex mu_;
  absl::Time now_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry

#endif  // SKERRY_COMMON_CLOCK_H_
