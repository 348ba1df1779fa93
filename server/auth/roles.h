// The four roles, their names on the command line, and who a caller is.
//
//   viewer      reads every run (list, show, watch, history, lineage, digest)
//   researcher  what a viewer may, plus submitting runs and steering its own
//   admin       everything but the worker protocol: any run, tokens, audit,
//               backups
//   worker      the worker protocol only (Join, Lease, Report)
//
// Which method needs which role is the rule table, server/auth/rules.h.
//
// Thread safety: pure functions and plain values.
#ifndef SKERRY_SERVER_AUTH_ROLES_H_
#define SKERRY_SERVER_AUTH_ROLES_H_

#include <cstdint>
#include <string>

#include "absl/status/status.h"
#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"
#include "skerry/v1/access.pb.h"

namespace skerry::auth {

using skerry::v1::Role;

// "viewer", "researcher", "admin", "worker"; "unknown" for anything else.
std::string RoleName(Role role);
// The inverse of RoleName; InvalidArgument listing the names otherwise.
absl::StatusOr<Role> ParseRole(absl::string_view name);

// The name of the caller while access control is off, and the owner of every
// run submitted then. Reserved: no principal may take it.
inline constexpr char kLocalPrincipal[] = "local";

// Who is calling: the principal behind the token, and the token's role.
struct Caller {
  std::string principal;
  Role role = skerry::v1::ROLE_UNSPECIFIED;
  int64_t token_id = 0;  // 0 while access control is off
};

// 1 to 64 characters of [A-Za-z0-9._@-], not starting with '-', and not
// kLocalPrincipal. InvalidArgument says what is wrong.
absl::Status CheckPrincipalName(absl::string_view name);

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_ROLES_H_
