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
  std::string host;  // brackets kept for IPv6: "[::1]"; empty: no address
  uint32_t port = 0;

  bool empty() const { return host.empty(); }
  // "HOST:PORT" as it was parsed; "" when empty.
  std::string ToString() const;
};

// `flag` names the source in errors ("--listen", "coordinator address").
absl::StatusOr<HostPort> ParseHostPort(absl::string_view flag,
                                       absl::string_view text,
                                       bool allow_port_zero = false);

// The Abseil flag type (absl/flags/marshalling.h): the rule above with port 0
// allowed. `error` says what was expected and quotes `text`; the caller names
// the flag (common/daemon_flags.h).
bool AbslParseFlag(absl::string_view text, HostPort* address,
                   std::string* error);
std::string AbslUnparseFlag(const HostPort& address);

}  // namespace skerry

#endif  // SKERRY_COMMON_HOST_PORT_H_
