// Who may do what: principals, their bearer tokens, the audit log (tables in
// access_schema.h, schema version 5), and a run's owner.
//
// ## Commit points
// Each is one transaction on the database's writer.
//   CreateToken        a token, and its principal when new
//   CreateFirstAdmin   the same, refused while a live admin token exists
//   RevokeToken        a token's revocation time and who revoked it
//   BeginAudit         an audit row, before the change it describes is made
//   FinishAudit        the outcome of that change
// The reads (ListTokens, CountPrincipals, QueryAudit, RunOwner) run on the
// read pool, in one snapshot of the newest commit.
//
// Invariant: a token is stored as the SHA-256 of its text, never the text; a
// token's hash is unique; an audit row is written before the change it
// describes and finished after it.
// Thread safety: every method may be called from any thread.
#ifndef SKERRY_SERVER_STORE_ACCESS_STORE_H_
#define SKERRY_SERVER_STORE_ACCESS_STORE_H_

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "server/store/access_records.h"
#include "server/store/database.h"

namespace skerry::store {

class AccessStore {
 public:
  explicit AccessStore(Database* db) : db_(db) {}

  // Creates the token's principal when it is new, then the token; fills in
  // token->id. AlreadyExists when the hash is already stored.
  absl::Status CreateToken(TokenRecord* token);
  // CreateToken for the first admin: FailedPrecondition, naming them, when a
  // live token of role admin exists already. One transaction.
  absl::Status CreateFirstAdmin(TokenRecord* token);
  // NotFound for no such token; FailedPrecondition when already revoked.
  absl::StatusOr<TokenRecord> RevokeToken(int64_t token_id,
                                          const std::string& by,
                                          int64_t now_ms);
  // Every token, by id.
  absl::StatusOr<std::vector<TokenRecord>> ListTokens();
  absl::StatusOr<int64_t> CountPrincipals();
  // Inserts `entry` (its code empty: not ended yet); returns its id.
  absl::StatusOr<int64_t> BeginAudit(const AuditRecord& entry);
  // Sets code, message, run_id and detail of the row entry.id.
  absl::Status FinishAudit(const AuditRecord& entry);
  absl::StatusOr<std::vector<AuditRecord>> QueryAudit(const AuditQuery& query);
  // The run's owner; empty when there is no such run.
  absl::StatusOr<std::optional<std::string>> RunOwner(int64_t run_id);

 private:
  static absl::Status InsertToken(Database::Writer& w, TokenRecord* token);

  Database* const db_;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_ACCESS_STORE_H_
