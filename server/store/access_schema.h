// Schema version 5: principals, their bearer tokens (hashed) and the audit log.
// Kept apart from database.cc so that this migration step stays self-contained;
// database.cc appends it to kMigrations. Never edit it once shipped: databases
// in the field were made by it.
//
//   principals(name PRIMARY KEY, created_ms, created_by)
//       a person or a worker machine; created with its first token
//   tokens(id, principal, role, hash UNIQUE, note, created_ms, created_by,
//          revoked_ms, revoked_by)
//       `hash` is the SHA-256 of the whole token text as 64 lower-case hex
//       digits; the token itself is never stored. `role` is the
//       skerry.v1.Role number. revoked_ms IS NULL: the token is live.
//   audit(id, at_ms, principal, role, token_id, method, run_id, peer, code,
//         message, detail)
//       one row per change a person asked for, written before the change is
//       made; code is NULL until the call has ended (and stays NULL when the
//       coordinator stopped in between), else the google.rpc code it ended
//       with.
#ifndef SKERRY_SERVER_STORE_ACCESS_SCHEMA_H_
#define SKERRY_SERVER_STORE_ACCESS_SCHEMA_H_

namespace skerry::store {

inline constexpr const char* kSchemaAccess = R"sql(
CREATE TABLE principals (
  name TEXT PRIMARY KEY,
  created_ms INTEGER NOT NULL,
  created_by TEXT NOT NULL
) WITHOUT ROWID;
CREATE TABLE tokens (
  id INTEGER PRIMARY KEY,
  principal TEXT NOT NULL,
  role INTEGER NOT NULL,
  hash TEXT NOT NULL UNIQUE,
  note TEXT NOT NULL DEFAULT '',
  created_ms INTEGER NOT NULL,
  created_by TEXT NOT NULL,
  revoked_ms INTEGER,
  revoked_by TEXT
);
CREATE INDEX tokens_principal ON tokens (principal);
CREATE TABLE audit (
  id INTEGER PRIMARY KEY,
  at_ms INTEGER NOT NULL,
  principal TEXT NOT NULL,
  role INTEGER NOT NULL,
  token_id INTEGER,
  method TEXT NOT NULL,
  run_id INTEGER,
  peer TEXT NOT NULL,
  code INTEGER,
  message TEXT NOT NULL DEFAULT '',
  detail TEXT NOT NULL DEFAULT ''
);
CREATE INDEX audit_run ON audit (run_id) WHERE run_id IS NOT NULL;
CREATE INDEX audit_principal ON audit (principal);
)sql";

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_ACCESS_SCHEMA_H_
