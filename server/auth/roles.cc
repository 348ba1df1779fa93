#include "server/auth/roles.h"

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"

namespace skerry::auth {

std::string RoleName(Role role) {
  switch (role) {
    case skerry::v1::ROLE_VIEWER:
      return "viewer";
    case skerry::v1::ROLE_RESEARCHER:
      return "researcher";
    case skerry::v1::ROLE_ADMIN:
      return "admin";
    case skerry::v1::ROLE_WORKER:
      return "worker";
    default:
      return "unknown";
  }
}

absl::StatusOr<Role> ParseRole(absl::string_view name) {
  for (Role r : {skerry::v1::ROLE_VIEWER, skerry::v1::ROLE_RESEARCHER,
                 skerry::v1::ROLE_ADMIN, skerry::v1::ROLE_WORKER}) {
    if (name == RoleName(r)) return r;
  }
  return absl::InvalidArgumentError(
      absl::StrCat("unknown role '", name,
                   "'; the roles are viewer, researcher, admin and worker"));
}

absl::Status CheckPrincipalName(absl::string_view name) {
  if (name.empty() || name.size() > 64) {
    return absl::InvalidArgumentError(absl::StrCat(
        "principal name must be 1 to 64 characters, got ", name.size()));
  }
  for (char c : name) {
    if (!absl::ascii_isalnum(static_cast<unsigned char>(c)) && c != '.' &&
        c != '_' && c != '@' && c != '-') {
      return absl::InvalidArgumentError(
          "principal name may hold only letters, digits and . _ @ -");
    }
  }
  if (name[0] == '-') {
    return absl::InvalidArgumentError("principal name must not start with '-'");
  }
  if (name == kLocalPrincipal) {
    return absl::InvalidArgumentError(
        absl::StrCat("'", kLocalPrincipal,
                     "' is reserved: it owns the runs submitted while access "
                     "control was off"));
  }
  return absl::OkStatus();
}

}  // namespace skerry::auth
