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

}  // namespace skerry
