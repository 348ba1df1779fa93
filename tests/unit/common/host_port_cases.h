// One table of HOST:PORT texts, run through the address flags of all three
// programs: ParseHostPort and the flag type itself (common/host_port_test.cc),
// skerry-coordinator's --listen and --http (server/coordinator_flags_test.cc),
// skerry-worker's --coordinator (worker/flags_test.cc) and the CLI's
// --coordinator (cli/args_test.cc). A text one accepts and another refuses
// would show here as one failing row.
//
// The rule is the one of common/host_port.h // common practice (IPv6 literals
// in brackets, as in URLs: RFC 3986, section 3.2.2).
#ifndef SKERRY_TESTS_UNIT_COMMON_HOST_PORT_CASES_H_
#define SKERRY_TESTS_UNIT_COMMON_HOST_PORT_CASES_H_

#include <vector>

namespace skerry::testdata {

struct HostPortCase {
  const char* text;
  bool client_ok;    // a port 1 to 65535: worker and CLI --coordinator
  bool listener_ok;  // port 0 too (a free port): --listen, --http
  const char* why;   // a part of the refusal ("" when both accept it)
};

inline const std::vector<HostPortCase>& HostPortCases() {
  static const auto* cases = new std::vector<HostPortCase>{
      {"127.0.0.1:7431", true, true, ""},
      {"localhost:1", true, true, ""},
      {"node-7.cluster:80", true, true, ""},
      {"[::1]:7431", true, true, ""},
      {"[::1]:65535", true, true, ""},
      {"0.0.0.0:0", false, true, "from 1 to 65535"},
      {"[::1]:0", false, true, "from 1 to 65535"},
      {"::1:7431", false, false, "in brackets"},
      {"[::1:7431", false, false, "unbalanced brackets"},
      {"a b:1", false, false, "bad character in host"},
      {"a/b:1", false, false, "bad character in host"},
      {"nohost", false, false, "no port"},
      {"", false, false, "no port"},
      {":7431", false, false, "empty host"},
      {"h:", false, false, "65535"},
      {"h:65536", false, false, "65535"},
      {"h:-1", false, false, "65535"},
      {"h:+1", false, false, "65535"},
      {"h:0x10", false, false, "65535"},
      {"h:port", false, false, "65535"},
  };
  return *cases;
}

}  // namespace skerry::testdata

#endif  // SKERRY_TESTS_UNIT_COMMON_HOST_PORT_CASES_H_
