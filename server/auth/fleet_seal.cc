#include "server/auth/fleet_seal.h"

#include <cstring>

#include "common/sha256.h"

namespace skerry::auth {
namespace {

constexpr size_t kBlock = 64;  // SHA-256's block size (FIPS 180-4)

std::string Bytes(const std::array<uint8_t, 32>& a) {
  return std::string(reinterpret_cast<const char*>(a.data()), a.size());
}

void PutU64(std::string* out, uint64_t v) {
  for (int i = 0; i < 8; ++i) out->push_back(static_cast<char>(v >> (8 * i)));
}

bool SameBytes(absl::string_view a, absl::string_view b) {
  if (a.size() != b.size()) return false;
  unsigned char diff = 0;
  for (size_t i = 0; i < a.size(); ++i) {
    diff |= static_cast<unsigned char>(a[i] ^ b[i]);
  }
  return diff == 0;
}

}  // namespace

std::array<uint8_t, 32> HmacSha256(absl::string_view key,
                                   absl::string_view message) {
  std::string k(key);
  if (k.size() > kBlock) {
    Sha256 h;
    h.Update(k);
    k = Bytes(h.Finish());
  }
  k.resize(kBlock, '\0');
  std::string ipad(kBlock, '\0'), opad(kBlock, '\0');
  for (size_t i = 0; i < kBlock; ++i) {
    ipad[i] = static_cast<char>(k[i] ^ 0x36);
    opad[i] = static_cast<char>(k[i] ^ 0x5c);
  }
  Sha256 inner;
  inner.Update(ipad);
  inner.Update(message);
  const std::string inner_digest = Bytes(inner.Finish());
  Sha256 outer;
  outer.Update(opad);
  outer.Update(inner_digest);
  return outer.Finish();
}

std::string FleetSeal::WorkerSecret(uint64_t worker_id) const {
  std::string m = "worker";
  PutU64(&m, worker_id);
  return Bytes(HmacSha256(key_, m));
}

bool FleetSeal::IsWorkerSecret(uint64_t worker_id,
                               absl::string_view secret) const {
  return SameBytes(WorkerSecret(worker_id), secret);
}

std::string FleetSeal::LeaseProof(uint64_t worker_id, uint64_t task_id,
                                  uint32_t attempt) const {
  std::string m = "lease";
  PutU64(&m, worker_id);
  PutU64(&m, task_id);
  PutU64(&m, attempt);
  return Bytes(HmacSha256(key_, m));
}

bool FleetSeal::IsLeaseProof(uint64_t worker_id, uint64_t task_id,
                             uint32_t attempt, absl::string_view proof) const {
  return SameBytes(LeaseProof(worker_id, task_id, attempt), proof);
}

}  // namespace skerry::auth
