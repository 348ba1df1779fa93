// SHA-256 (FIPS 180-4), for run digests: a hash of a run's genomes that lets
// two people prove their runs are the same. Not used for anything secret.
//
// Thread safety: a Sha256 object is used by one thread at a time.
#ifndef SKERRY_COMMON_SHA256_H_
#define SKERRY_COMMON_SHA256_H_

#include <array>
#include <cstdint>
#include <string>

#include "absl/strings/string_view.h"

namespace skerry {

class Sha256 {
 public:
  Sha256();
  void Update(absl::string_view data);
  void UpdateU32(uint32_t v);  // little-endian
  void UpdateU64(uint64_t v);  // little-endian
  // The digest; the object must not be updated afterwards.
  std::array<uint8_t, 32> Finish();
  // Finish() as 64 lower-case hex digits.
  std::string FinishHex();

 private:
  void Block(const uint8_t* p);
  std::array<uint32_t, 8> h_;
  std::array<uint8_t, 64> buf_{};
  size_t used_ = 0;
  uint64_t total_ = 0;
};

}  // namespace skerry

#endif  // SKERRY_COMMON_SHA256_H_
