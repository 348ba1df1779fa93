// The daemons' command-line rules (common/daemon_flags.h), on flags of this
// test's own.
#include "common/daemon_flags.h"

#include <string>
#include <vector>

#include "absl/flags/flag.h"
#include "absl/status/status.h"
#include "common/host_port.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

using TestCount = skerry::WholeNumber<1, 10>;
ABSL_FLAG(TestCount, test_count, {}, "a count for this test");
ABSL_FLAG(bool, test_switch, false, "a switch for this test");
ABSL_FLAG(skerry::HostPort, test_address, skerry::HostPort(),
          "an address for this test");
ABSL_FLAG(double, test_ratio, 0, "a number for this test");

namespace skerry {
namespace {

using ::testing::HasSubstr;

constexpr DaemonFlag kRows[] = {{"test-count"},
                                {"test-switch"},
                                {"test-address"},
                                {"test-ratio", "a number from 0 to 1"}};

absl::StatusOr<DaemonCommandLine> Parse(std::vector<std::string> args,
                                        bool repeats = true) {
  return ParseDaemonFlags(args, kRows, repeats);
}

TEST(DaemonFlagsTest, ValuesTakeEqualsOrTheNextArgument) {
  absl::StatusOr<DaemonCommandLine> line =
      Parse({"--test-count=3", "--test-address", "[::1]:80", "--test-switch"});
  ASSERT_TRUE(line.ok()) << line.status();
  EXPECT_EQ(line->given, (std::set<std::string>{"test-count", "test-address",
                                                "test-switch"}));
  EXPECT_EQ(absl::GetFlag(FLAGS_test_count).value, 3u);
  EXPECT_EQ(absl::GetFlag(FLAGS_test_address).ToString(), "[::1]:80");
  EXPECT_TRUE(absl::GetFlag(FLAGS_test_switch));
  line = Parse({"--test-count", "4", "--test-address=h:1"});
  ASSERT_TRUE(line.ok()) << line.status();
  EXPECT_EQ(absl::GetFlag(FLAGS_test_count).value, 4u);
  EXPECT_EQ(absl::GetFlag(FLAGS_test_address).ToString(), "h:1");
}

TEST(DaemonFlagsTest, RefusalsNameTheFlagAsWrittenAndQuoteTheValue) {
  struct Case {
    std::vector<std::string> args;
    const char* message;
  };
  for (const Case& c : std::vector<Case>{
           {{"--test-count=11"},
            "--test-count: expected a whole number from 1 to 10, got \"11\""},
           {{"--test-count", " 4"}, "got \" 4\""},
           {{"--test-count=0x3"}, "got \"0x3\""},
           {{"--test-address=::1:80"},
            "--test-address: expected HOST:PORT (an IPv6 address must be in "
            "brackets"},
           {{"--test-ratio=half"},
            "--test-ratio: expected a number from 0 to 1, got \"half\""},
           {{"--test-switch=yes"}, "--test-switch: takes no value"},
           {{"--test-count"}, "--test-count: missing value"},
           {{"stray"}, "unexpected argument \"stray\""},
           {{"--version=2"}, "--version: takes no value"},
       }) {
    SCOPED_TRACE(c.args[0]);
    absl::StatusOr<DaemonCommandLine> line = Parse(c.args);
    ASSERT_FALSE(line.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(line.status()));
    EXPECT_THAT(line.status().message(), HasSubstr(c.message));
  }
}

TEST(DaemonFlagsTest, AnUnknownFlagIsNamedButItsValueNeverEchoed) {
  absl::StatusOr<DaemonCommandLine> line = Parse({"--tokn=skt_secretvalue"});
  ASSERT_FALSE(line.ok());
  EXPECT_THAT(line.status().message(), HasSubstr("unknown flag \"--tokn\""));
  EXPECT_THAT(std::string(line.status().message()),
              ::testing::Not(HasSubstr("secretvalue")));
}

TEST(DaemonFlagsTest, RepeatsTakeTheLastValueOnlyWhereAllowed) {
  ASSERT_TRUE(Parse({"--test-count=2", "--test-count=5"}).ok());
  EXPECT_EQ(absl::GetFlag(FLAGS_test_count).value, 5u);
  absl::StatusOr<DaemonCommandLine> line =
      Parse({"--test-count=2", "--test-count=5"}, /*repeats=*/false);
  ASSERT_FALSE(line.ok());
  EXPECT_THAT(line.status().message(),
              HasSubstr("--test-count: given more than once"));
}

TEST(DaemonFlagsTest, HelpAndVersionEndTheParseAfterCheckingWhatCameBefore) {
  for (const char* stop : {"--help", "-h", "--version"}) {
    SCOPED_TRACE(stop);
    absl::StatusOr<DaemonCommandLine> line = Parse({stop, "--test-count=99"});
    ASSERT_TRUE(line.ok()) << line.status();
    EXPECT_EQ(line->help, std::string(stop) != "--version");
    EXPECT_EQ(line->version, std::string(stop) == "--version");
    EXPECT_FALSE(Parse({"--test-count=99", stop}).ok());
  }
}

}  // namespace
}  // namespace skerry
