// The portable SHA-256 that common/sha256.h used before it called OpenSSL,
// kept only so that skerry-hash-bench can compare the two (and check that
// they agree) on this machine. Not linked by any program.
//
// Thread safety: one object per thread.
#ifndef SKERRY_BENCH_SHA256_PORTABLE_H_
#define SKERRY_BENCH_SHA256_PORTABLE_H_

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>

#include "absl/strings/string_view.h"

namespace skerry::bench {

class PortableSha256 {
 public:
  PortableSha256();
  void Update(absl::string_view data);
  void UpdateU32(uint32_t v);  // little-endian
  void UpdateU64(uint64_t v);  // little-endian
  std::array<uint8_t, 32> Finish();
  std::string FinishHex();

 private:
  void Block(const uint8_t* p);
  std::array<uint32_t, 8> h_;
  std::array<uint8_t, 64> buf_{};
  size_t used_ = 0;
  uint64_t total_ = 0;
};

}  // namespace skerry::bench

#endif  // SKERRY_BENCH_SHA256_PORTABLE_H_
