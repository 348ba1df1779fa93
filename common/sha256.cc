#include "common/sha256.h"

#include <openssl/evp.h>

#include <cstdlib>
#include <cstring>

#include "absl/strings/escaping.h"

namespace skerry {
namespace {

// Fetched once: an implicit fetch at every EVP_DigestInit_ex costs about as
// much as hashing a short row.
const EVP_MD* Sha256Md() {
  static const EVP_MD* const md = [] {
    const EVP_MD* fetched = EVP_MD_fetch(nullptr, "SHA256", nullptr);
    return fetched != nullptr ? fetched : EVP_sha256();
  }();
  return md;
}

// libcrypto failing to hash (out of memory) leaves nothing sensible to return:
// a wrong digest would be silently stored. Stop instead.
void Check(int ok) {
  if (ok != 1) std::abort();
}

}  // namespace

Sha256::Sha256() : ctx_(EVP_MD_CTX_new()) {
  if (ctx_ == nullptr) std::abort();
  Check(EVP_DigestInit_ex(ctx_, Sha256Md(), nullptr));
}

Sha256::~Sha256() { EVP_MD_CTX_free(ctx_); }

void Sha256::Flush() {
  if (used_ == 0) return;
  Check(EVP_DigestUpdate(ctx_, buf_.data(), used_));
  used_ = 0;
}

void Sha256::Update(absl::string_view data) {
  if (data.size() <= buf_.size() - used_) {
    if (!data.empty())
      std::memcpy(buf_.data() + used_, data.data(), data.size());
    used_ += data.size();
    return;
  }
  Flush();
  if (data.size() >= buf_.size()) {
    Check(EVP_DigestUpdate(ctx_, data.data(), data.size()));
    return;
  }
  std::memcpy(buf_.data(), data.data(), data.size());
  used_ = data.size();
}

void Sha256::UpdateU32(uint32_t v) {
  uint8_t b[4];
  for (int i = 0; i < 4; ++i) b[i] = static_cast<uint8_t>(v >> (8 * i));
  Update(absl::string_view(reinterpret_cast<const char*>(b), 4));
}

void Sha256::UpdateU64(uint64_t v) {
  uint8_t b[8];
  for (int i = 0; i < 8; ++i) b[i] = static_cast<uint8_t>(v >> (8 * i));
  Update(absl::string_view(reinterpret_cast<const char*>(b), 8));
}

std::array<uint8_t, 32> Sha256::Finish() {
  Flush();
  std::array<uint8_t, 32> out{};
  unsigned int size = 0;
  Check(EVP_DigestFinal_ex(ctx_, out.data(), &size));
  if (size != out.size()) std::abort();
  return out;
}

std::string Sha256::FinishHex() {
  const std::array<uint8_t, 32> d = Finish();
  return absl::BytesToHexString(
      absl::string_view(reinterpret_cast<const char*>(d.data()), d.size()));
}

}  // namespace skerry
