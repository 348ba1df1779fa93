#include "common/random.h"

#include <cmath>
#include <limits>

namespace skerry {
namespace {

// Philox4x32 constants: Salmon, Moraes, Dror & Shaw 2011, section 4.
constexpr uint32_t kPhiloxM0 = 0xD2511F53;
constexpr uint32_t kPhiloxM1 = 0xCD9E8D57;
constexpr uint32_t kPhiloxW0 = 0x9E3779B9;  // golden ratio
constexpr uint32_t kPhiloxW1 = 0xBB67AE85;  // sqrt(3) - 1
constexpr int kPhiloxRounds = 10;

constexpr double kTwoPi = 6.283185307179586476925286766559;

inline void MulHiLo(uint32_t a, uint32_t b, uint32_t* hi, uint32_t* lo) {
  const uint64_t product = static_cast<uint64_t>(a) * b;
  *hi = static_cast<uint32_t>(product >> 32);
  *lo = static_cast<uint32_t>(product);
}

}  // namespace

std::array<uint32_t, 4> Philox4x32_10(std::array<uint32_t, 4> counter,
                                      std::array<uint32_t, 2> key) {
  for (int round = 0; round < kPhiloxRounds; ++round) {
    if (round > 0) {
      key[0] += kPhiloxW0;
      key[1] += kPhiloxW1;
    }
    uint32_t hi0, lo0, hi1, lo1;
    MulHiLo(kPhiloxM0, counter[0], &hi0, &lo0);
    MulHiLo(kPhiloxM1, counter[2], &hi1, &lo1);
    counter = {hi1 ^ counter[1] ^ key[0], lo1, hi0 ^ counter[3] ^ key[1], lo0};
  }
  return counter;
}

RandomStream::RandomStream(const StreamKey& key)
    : key_{static_cast<uint32_t>(key.run_seed),
           static_cast<uint32_t>(key.run_seed >> 32)},
      base_{0, key.slot, key.generation,
            (static_cast<uint32_t>(key.purpose) << 16) |
                (key.island & 0xFFFFu)} {}

uint64_t RandomStream::NextU64() {
  if (used_ >= 3) {  // fewer than two words left: start a fresh block
    std::array<uint32_t, 4> counter = base_;
    counter[0] = block_++;
    buffer_ = Philox4x32_10(counter, key_);
    used_ = 0;
  }
  const uint64_t low = buffer_[used_];
  const uint64_t high = buffer_[used_ + 1];
  used_ += 2;
  return (high << 32) | low;
}

double RandomStream::Uniform01() {
  return static_cast<double>(NextU64() >> 11) * 0x1.0p-53;
}

double RandomStream::Uniform(double lo, double hi) {
  const double u = lo + (hi - lo) * Uniform01();
  // Rounding can land exactly on hi; keep the interval half-open.
  return u < hi ? u : std::nextafter(hi, lo);
}

uint64_t RandomStream::Below(uint64_t n) {
  if (n <= 1) return 0;
  // Reject the lowest (2^64 mod n) values so every residue is equally likely.
  const uint64_t threshold = (0 - n) % n;
  for (;;) {
    const uint64_t r = NextU64();
    if (r >= threshold) return r % n;
  }
}

double RandomStream::Normal() {
  if (has_spare_normal_) {
    has_spare_normal_ = false;
    return spare_normal_;
  }
  const double u1 = 1.0 - Uniform01();  // (0, 1]: log is finite
  const double u2 = Uniform01();
  const double radius = std::sqrt(-2.0 * std::log(u1));
  spare_normal_ = radius * std::sin(kTwoPi * u2);
  has_spare_normal_ = true;
  return radius * std::cos(kTwoPi * u2);
}

bool RandomStream::Bernoulli(double p) { return Uniform01() < p; }

}  // namespace skerry
