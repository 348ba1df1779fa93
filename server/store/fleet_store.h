// The fleet: the workers that joined (table workers) and the fleet key that
// seals worker secrets and lease proofs (table fleet_keys, schema version 11;
// server/auth/fleet_seal.h).
//
// ## Commit points
// Each is one transaction on the database's writer.
//   RegisterWorker     a worker's row when it joins
//   TouchWorkers       the time each of a batch of workers was last seen
//   FleetKey           the key, at its first call only
// ListWorkers and CountWorkersSeenSince run on the read pool.
//
// Invariant: the fleet key, once made, never changes; a copy of the database
// carries it, so a restored coordinator still knows its workers.
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_STORE_FLEET_STORE_H_
#define SKERRY_SERVER_STORE_FLEET_STORE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/database.h"
#include "server/store/records.h"

namespace skerry::store {

class FleetStore {
 public:
  explicit FleetStore(Database* db) : db_(db) {}

  absl::StatusOr<int64_t> RegisterWorker(const WorkerRecord& worker);
  absl::Status TouchWorkers(absl::Span<const int64_t> ids, int64_t now_ms);
  // The fleet key: 32 random bytes, made and committed at the first call,
  // the same ever after.
  absl::StatusOr<std::string> FleetKey();

  absl::StatusOr<int> CountWorkersSeenSince(int64_t since_ms);
  // The `limit` workers seen last, newest first, with the sandbox column
  // when the schema has one.
  struct WorkerRow {
    WorkerRecord worker;
    std::optional<std::string> sandbox;
  };
  absl::StatusOr<std::vector<WorkerRow>> ListWorkers(int limit);

 private:
  Database* const db_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_FLEET_STORE_H_
