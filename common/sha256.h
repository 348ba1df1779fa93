// SHA-256 (FIPS 180-4), computed by OpenSSL's EVP interface (libcrypto). Used
// for run digests (a hash of a run's genomes that lets two people prove their
// runs are the same), the row checksums of the store (server/store/row_sums.h)
// and the hashes of bearer tokens kept in the database
// (server/auth/tokens.h): a token is stored only as this hash.
//
// Invariant: the digest depends only on the bytes given, not on how they were
// split across Update calls; small updates are gathered in a buffer before
// they reach OpenSSL, which is what makes many 4- and 8-byte fields cheap.
//
// Thread safety: a Sha256 object is used by one thread at a time; separate
// objects may be used on any threads at once.
#ifndef SKERRY_COMMON_SHA256_H_
#define SKERRY_COMMON_SHA256_H_

#include <array>
#include <cstddef>
#include <cstdint>
#include <string>

#include "absl/strings/string_view.h"

struct evp_md_ctx_st;  // OpenSSL's EVP_MD_CTX, kept out of this header

namespace skerry {

class Sha256 {
 public:
  Sha256();
  ~Sha256();
  Sha256(const Sha256&) = delete;
  Sha256& operator=(const Sha256&) = delete;

  void Update(absl::string_view data);
  void UpdateU32(uint32_t v);  // little-endian
  void UpdateU64(uint64_t v);  // little-endian
  // The digest; the object must not be updated afterwards.
  std::array<uint8_t, 32> Finish();
  // Finish() as 64 lower-case hex digits.
  std::string FinishHex();

 private:
  void Flush();

  evp_md_ctx_st* ctx_;  // owned, never null
  std::array<uint8_t, 512> buf_{};
  size_t used_ = 0;
};

}  // namespace skerry

#endif  // SKERRY_COMMON_SHA256_H_
