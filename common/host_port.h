// HOST:PORT, the one address syntax of all three programs: the coordinator's
// --listen and --http, the worker's --coordinator and the CLI's --coordinator
// (and $SKERRY_COORDINATOR).
//
// Rules: the port is the text after the last ':', a whole number from 1 to
// 65535 (0 too where the caller allows it: a listener asking for a free port);
// an IPv6 literal is written in brackets ([::1]:7431), so a host with a ':'
// outside brackets is refused; the host is not empty and has no space, tab,
// '/' or control character. Errors name the flag, say what was expected and
// quote what was given.
//
// Thread safety: pure functions.
#ifndef SKERRY_COMMON_HOST_PORT_H_
#define SKERRY_COMMON_HOST_PORT_H_

#include <cstdint>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/string_view.h"

namespace skerry {

struct HostPort {
  std::string host;  // brackets kept for IPv6: "[::1]"
  uint32_t port = 0;
};

// `flag` names the source in errors ("--listen", "coordinator address").
absl::StatusOr<HostPort> ParseHostPort(absl::string_view flag,
                                       absl::string_view text,
                                       bool allow_port_zero = false);

}  // namespace skerry

#endif  // SKERRY_COMMON_HOST_PORT_H_
