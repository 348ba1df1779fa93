// Held-out validations of genomes (table validations, schema version 4;
// store.h): requests, outcomes and the reads of them.
//
// ## Commit points
// Each is one transaction on the database's writer.
//   RequestValidation  a validation request for one genome (or the stored one)
//   CommitValidations  a batch of validation outcomes
// Request and Apply write inside another store's transaction (a generation's
// champion in RunStore::CommitGeneration; outcomes reported with results in
// GenomeStore::CommitResults).
//
// A validation's `state` and `reason` are the enum numbers of
// proto/skerry/v1/validation.proto; `generation` repeats the genome's, so
// trimming a run past its stop generation trims its validations too.
//
// Invariant: at most one validation per genome; a validation's id is never
// given twice (Database::LargestId).
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_STORE_VALIDATION_STORE_H_
#define SKERRY_SERVER_STORE_VALIDATION_STORE_H_

#include <cstdint>
#include <map>
#include <optional>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/database.h"
#include "server/store/records.h"
#include "server/store/sqlite.h"

namespace skerry::store {

class ValidationStore {
 public:
  explicit ValidationStore(Database* db) : db_(db) {}

  // ---- Commit points ----
  // Stores a pending validation of the genome and returns it, unless the
  // genome has one already (returned as stored). A genome carried over
  // unchanged (ELITE, MIGRANT) whose parent's validation is done gets a copy of
  // it (state DONE, copied_from set). NotFound names a missing genome.
  absl::StatusOr<ValidationRecord> RequestValidation(
      const ValidationRequest& request);
  absl::Status CommitValidations(absl::Span<const ValidationUpdate> updates);

  // RequestValidation and CommitValidations in the writer's open
  // transaction. A validation no longer pending (trimmed with its
  // generation, or finished already) is left alone by Apply.
  static absl::StatusOr<ValidationRecord> Request(
      Database::Writer& w, const ValidationRequest& request);
  static absl::Status Apply(Database::Writer& w,
                            absl::Span<const ValidationUpdate> updates);

  // ---- Reads (on the read pool) ----
  // Every pending validation, oldest first, genes filled.
  absl::StatusOr<std::vector<ValidationRecord>> PendingValidations();
  // The genome's validation, or nothing.
  absl::StatusOr<std::optional<ValidationRecord>> GetValidation(
      int64_t genome_id);
  // The validation scores of a run's generation champions, finished ones
  // only, keyed by (island, generation).
  absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>>
  ChampionValidationScores(int64_t run_id);
  // A run's validations, newest first, at most `limit`.
  absl::StatusOr<std::vector<ValidationRecord>> ListValidations(int64_t run_id,
                                                                int limit);

 private:
  static absl::StatusOr<std::optional<ValidationRecord>> Get(Connection* conn,
                                                             int64_t genome_id);
  static absl::StatusOr<std::vector<ValidationRecord>> Query(Connection* conn,
                                                             Statement* stmt,
                                                             bool with_genes);

  Database* const db_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_VALIDATION_STORE_H_
