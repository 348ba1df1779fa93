// The refusal a `skerry-coordinator --read-only` sends to every call that
// would change its database (server/auth/access_control.h decides which).
//
// Invariant: the status is FAILED_PRECONDITION and its message starts with
// kReadOnlyRefusal, so that a worker can tell "this coordinator will never
// take work" (it stops, exit code 1) from a passing precondition such as a
// fleet table that is not there yet (it joins again). The phrase is part of
// the worker protocol (docs/protocol.md); never reword it.
//
// Thread safety: constants only.
#ifndef SKERRY_COMMON_READ_ONLY_H_
#define SKERRY_COMMON_READ_ONLY_H_

#include "absl/strings/match.h"
#include "absl/strings/string_view.h"

namespace skerry {

inline constexpr char kReadOnlyRefusal[] =
    "coordinator is read-only (--read-only)";

inline bool IsReadOnlyRefusal(absl::string_view message) {
  return absl::StartsWith(message, kReadOnlyRefusal);
}

}  // namespace skerry

#endif  // SKERRY_COMMON_READ_ONLY_H_
