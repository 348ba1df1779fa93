// HOST:PORT, the address syntax shared by the three programs
// (common/host_port.h).
#include "common/host_port.h"

#include <string>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/common/host_port_cases.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

TEST(HostPortTest, AcceptsNamesAddressesAndBracketedIpv6) {
  struct Case {
    const char* text;
    const char* host;
    uint32_t port;
  };
  for (const Case& c : {Case{"127.0.0.1:7431", "127.0.0.1", 7431},
                        Case{"localhost:1", "localhost", 1},
                        Case{"[::1]:65535", "[::1]", 65535},
                        Case{"node-7.cluster:80", "node-7.cluster", 80}}) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<HostPort> got = ParseHostPort("--x", c.text);
    ASSERT_TRUE(got.ok()) << got.status();
    EXPECT_EQ(got->host, c.host);
    EXPECT_EQ(got->port, c.port);
  }
}

TEST(HostPortTest, RefusesWithTheFlagTheReasonAndTheText) {
  struct Case {
    const char* text;
    const char* why;
  };
  for (const Case& c :
       {Case{"nohost", "no port"}, Case{":7431", "empty host"},
        Case{"::1:7431", "in brackets"}, Case{"[::1:7431", "unbalanced"},
        Case{"a b:1", "bad character"}, Case{"a/b:1", "bad character"},
        Case{"h:0", "from 1 to 65535"}, Case{"h:65536", "from 1 to 65535"},
        Case{"h:", "from 1 to 65535"}, Case{"h:+1", "from 1 to 65535"},
        Case{"h:1x", "from 1 to 65535"}, Case{"h:0000080", "65535"}}) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<HostPort> got = ParseHostPort("--x", c.text);
    ASSERT_FALSE(got.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(got.status()));
    EXPECT_THAT(got.status().message(), HasSubstr("--x: expected HOST:PORT"));
    EXPECT_THAT(got.status().message(), HasSubstr(c.why));
    EXPECT_THAT(got.status().message(), HasSubstr(c.text));
  }
}

TEST(HostPortTest, PortZeroOnlyWhereAllowed) {
  EXPECT_FALSE(ParseHostPort("--x", "127.0.0.1:0").ok());
  absl::StatusOr<HostPort> free_port =
      ParseHostPort("--listen", "127.0.0.1:0", /*allow_port_zero=*/true);
  ASSERT_TRUE(free_port.ok()) << free_port.status();
  EXPECT_EQ(free_port->port, 0u);
}

}  // namespace
}  // namespace skerry

namespace skerry {
namespace {

using ::testing::HasSubstr;

TEST(HostPortTest, SharedTableThroughParseHostPortAndTheFlagType) {
  for (const testdata::HostPortCase& c : testdata::HostPortCases()) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<HostPort> client = ParseHostPort("--x", c.text);
    EXPECT_EQ(client.ok(), c.client_ok) << client.status();
    absl::StatusOr<HostPort> listener =
        ParseHostPort("--x", c.text, /*allow_port_zero=*/true);
    EXPECT_EQ(listener.ok(), c.listener_ok) << listener.status();
    HostPort flag;
    std::string error;
    EXPECT_EQ(AbslParseFlag(c.text, &flag, &error), c.listener_ok) << error;
    if (c.listener_ok) {
      // Unparsing gives the text back: the flag's value round-trips.
      EXPECT_EQ(AbslUnparseFlag(flag), c.text);
    } else {
      EXPECT_THAT(error, HasSubstr(c.why));
      EXPECT_THAT(error, HasSubstr(absl::StrCat("\"", c.text, "\"")));
    }
    if (!c.client_ok) {
      EXPECT_THAT(client.status().message(), HasSubstr(c.why));
    }
  }
}

}  // namespace
}  // namespace skerry
