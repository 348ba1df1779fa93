// Rows of the access tables (schema version 4, server/store/access_schema.h):
// bearer tokens of principals, and audit entries. Plain values.
#ifndef SKERRY_SERVER_STORE_ACCESS_RECORDS_H_
#define SKERRY_SERVER_STORE_ACCESS_RECORDS_H_

#include <cstdint>
#include <optional>
#include <string>

namespace skerry::store {

struct TokenRecord {
  int64_t id = 0;
  std::string principal;
  int32_t role = 0;  // skerry.v1.Role number
  std::string hash;  // SHA-256 of the token, 64 lower-case hex digits
  std::string note;
  int64_t created_ms = 0;
  std::string created_by;
  std::optional<int64_t> revoked_ms;  // empty: live
  std::string revoked_by;
};

struct AuditRecord {
  int64_t id = 0;
  int64_t at_ms = 0;
  std::string principal;
  int32_t role = 0;
  int64_t token_id = 0;         // 0: none (access control off)
  std::string method;           // full gRPC method name
  int64_t run_id = 0;           // 0: none
  std::string peer;             // gRPC's peer string: "ipv4:127.0.0.1:53412"
  std::optional<int32_t> code;  // empty: the call had not ended
  std::string message;
  std::string detail;
};

// Newest first. Empty fields do not filter.
struct AuditQuery {
  int64_t run_id = 0;
  std::string principal;
  int64_t before_id = 0;  // only entries with a smaller id (paging); 0: all
  int limit = 100;
};

}  // namespace skerry::store

#endif  // SKERRY_SERVER_STORE_ACCESS_RECORDS_H_
