// The release version of every Skerry program, and the worker protocol's
// version.
//
// Invariant: kVersion is the one place the release number is written; the top
// CMakeLists.txt reads it from this file for project() and the package, so the
// binaries' --version and the Debian package always agree. The worker protocol
// (proto/skerry/v1/fleet.proto) changes its number only when an old worker and
// a new coordinator (or the reverse) would misunderstand each other; a
// coordinator speaks every protocol from kMinProtocolVersion to
// kProtocolVersion and refuses any other at Join, naming both versions.
// Protocol 2: worker secrets and lease proofs (fleet.proto), which protocol 1
// workers do not send.
//
// Thread safety: constants only.
#ifndef SKERRY_COMMON_VERSION_H_
#define SKERRY_COMMON_VERSION_H_

#include <cstdint>
#include <string>

#include "absl/strings/str_cat.h"

namespace skerry {

inline constexpr char kVersion[] = "0.1.0";  // SKERRY_RELEASE_VERSION
inline constexpr uint32_t kProtocolVersion = 2;
inline constexpr uint32_t kMinProtocolVersion = 2;

// The --version line of `program`, e.g. "skerry-worker 0.1.0 (worker
// protocol 1)".
inline std::string VersionLine(const char* program) {
  return absl::StrCat(program, " ", kVersion, " (worker protocol ",
                      kProtocolVersion, ")\n");
}

}  // namespace skerry

#endif  // SKERRY_COMMON_VERSION_H_
