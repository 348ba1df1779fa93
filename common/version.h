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
// workers do not send. Protocol 3: Task.genes32 (a gene_precision FLOAT32
// run's genes, 4 bytes each); a worker states its protocol in every
// LeaseRequest, and one of protocol 2 (which sends none there) gets those
// genes as doubles in Task.genes, the same values, since it would not read
// genes32.
//
// Thread safety: constants only.
#ifndef SKERRY_COMMON_VERSION_H_
#define SKERRY_COMMON_VERSION_H_

#include <cstdint>
#include <string>

#include "absl/strings/str_cat.h"
#include "absl/strings/string_view.h"

namespace skerry {

inline constexpr char kVersion[] = "0.1.0";  // SKERRY_RELEASE_VERSION
inline constexpr uint32_t kProtocolVersion = 4;
inline constexpr uint32_t kMinProtocolVersion = 2;
// The first protocol whose workers read Task.genes32.
inline constexpr uint32_t kGenes32Protocol = 3;
// The first protocol whose workers build natural ES samples from their
// recipes (Task.sample) and centres (LeaseResponse.centres).
inline constexpr uint32_t kSampleRecipeProtocol = 4;

// The --version line of `program`, e.g. "skerry-worker 0.1.0 (worker
// protocol 4)"; the coordinator's names every protocol it speaks:
// "skerry-coordinator 0.1.0 (worker protocols 2 to 4)".
inline std::string VersionLine(absl::string_view program) {
  if (program == "skerry-coordinator") {
    return absl::StrCat(program, " ", kVersion, " (worker protocols ",
                        kMinProtocolVersion, " to ", kProtocolVersion, ")\n");
  }
  return absl::StrCat(program, " ", kVersion, " (worker protocol ",
                      kProtocolVersion, ")\n");
}

}  // namespace skerry

#endif  // SKERRY_COMMON_VERSION_H_
