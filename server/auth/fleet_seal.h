// FleetSeal: the worker secrets and lease proofs of the worker protocol
// (fleet.proto), both HMAC-SHA256 (RFC 2104) under one key kept in the
// coordinator's database (FleetStore::FleetKey).
//
// Invariant: a worker secret or lease proof is a pure function of the key and
// what it names, so one issued before a coordinator restart is still valid
// after it; without the key nobody can make one. A worker secret names a
// worker id (only that worker was told it); a lease proof names (worker id,
// task id, attempt): the coordinator leased that attempt of that task to that
// worker. Checks compare in constant time.
//
// Thread safety: immutable after construction; any thread may call any method.
#ifndef SKERRY_SERVER_AUTH_FLEET_SEAL_H_
#define SKERRY_SERVER_AUTH_FLEET_SEAL_H_

#include <array>
#include <cstdint>
#include <string>

#include "absl/strings/string_view.h"

namespace skerry::auth {

// HMAC-SHA256 of `message` under `key` (RFC 2104 with SHA-256, FIPS 180-4).
std::array<uint8_t, 32> HmacSha256(absl::string_view key,
                                   absl::string_view message);

class FleetSeal {
 public:
  // `key`: 32 random bytes (any length works; RFC 2104 hashes longer keys).
  explicit FleetSeal(std::string key) : key_(std::move(key)) {}

  std::string WorkerSecret(uint64_t worker_id) const;
  bool IsWorkerSecret(uint64_t worker_id, absl::string_view secret) const;

  std::string LeaseProof(uint64_t worker_id, uint64_t task_id,
                         uint32_t attempt) const;
  bool IsLeaseProof(uint64_t worker_id, uint64_t task_id, uint32_t attempt,
                    absl::string_view proof) const;

 private:
  const std::string key_;
};

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_FLEET_SEAL_H_
