// Command-line flags of skerry-coordinator: Abseil flags (ABSL_FLAG in
// coordinator_flags.cc) read by the rules of common/daemon_flags.h, copied
// into CoordinatorOptions. Addresses (--listen, --http) are HostPort flags
// (common/host_port.h), port 0 allowed.
//
// Thread safety: ParseCoordinatorFlags sets the process's flags: one parse at
// a time; CoordinatorUsage is pure.
#ifndef SKERRY_SERVER_COORDINATOR_FLAGS_H_
#define SKERRY_SERVER_COORDINATOR_FLAGS_H_

#include <string>

#include "absl/status/statusor.h"
#include "server/coordinator.h"

namespace skerry::server {

struct CoordinatorFlags {
  CoordinatorOptions options;
  bool help = false;
  bool version = false;     // --version: print it and exit
  std::string check_db;     // --check DB: check and exit
  std::string init_admin;   // --init-admin NAME: make the first admin and exit
  std::string import_file;  // --import FILE: import its runs into --db, exit
};

// InvalidArgument names the flag, what it takes and the value given. A flag
// given twice takes the last value (deploy units append $..._FLAGS).
absl::StatusOr<CoordinatorFlags> ParseCoordinatorFlags(int argc,
                                                       const char* const* argv);
std::string CoordinatorUsage();

}  // namespace skerry::server

#endif  // SKERRY_SERVER_COORDINATOR_FLAGS_H_
