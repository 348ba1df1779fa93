#include "cli/args.h"

#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/common/host_port_cases.h"

namespace skerry::cli {
namespace {

using ::testing::HasSubstr;

absl::StatusOr<ParsedArgs> Parse(std::vector<std::string> args,
                                 absl::string_view env = "") {
  return ParseArgs(args, env);
}

TEST(ParseArgsTest, CoordinatorDefaultsToLoopbackPort7431) {
  auto parsed = Parse({"list"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->coordinator, "127.0.0.1:7431");
  EXPECT_EQ(parsed->command, "list");
}

TEST(ParseArgsTest, EnvironmentOverridesDefaultAndFlagOverridesEnvironment) {
  auto from_env = Parse({"list"}, "lab-3:9000");
  ASSERT_TRUE(from_env.ok()) << from_env.status();
  EXPECT_EQ(from_env->coordinator, "lab-3:9000");
  auto from_flag = Parse({"--coordinator", "lab-4:9001", "list"}, "lab-3:9000");
  ASSERT_TRUE(from_flag.ok()) << from_flag.status();
  EXPECT_EQ(from_flag->coordinator, "lab-4:9001");
  auto with_equals = Parse({"--coordinator=lab-5:1", "list"});
  ASSERT_TRUE(with_equals.ok()) << with_equals.status();
  EXPECT_EQ(with_equals->coordinator, "lab-5:1");
}

TEST(ParseArgsTest, ReportTakesSeveralRunsAndDashOIsOut) {
  auto parsed = Parse({"report", "1", "2", "3", "-o", "runs.html"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->positionals, (std::vector<std::string>{"1", "2", "3"}));
  EXPECT_EQ(parsed->Get("out"), "runs.html");
  auto missing_out = Parse({"report", "1"});
  EXPECT_THAT(std::string(missing_out.status().message()), HasSubstr("--out"));
  // -o means --out only for commands that write a file.
  EXPECT_FALSE(Parse({"list", "-o", "x"}).ok());
  // A command with a fixed count still refuses extra arguments.
  EXPECT_FALSE(Parse({"digest", "1", "2"}).ok());
}

TEST(ParseArgsTest, CoordinatorAfterTheCommandIsAcceptedToo) {
  auto parsed = Parse({"show", "4", "--coordinator", "h:2"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->coordinator, "h:2");
  EXPECT_EQ(parsed->positionals, std::vector<std::string>({"4"}));
}

TEST(ParseArgsTest, BadCoordinatorAddressIsAUsageErrorNamingIt) {
  struct Case {
    const char* address;
  };
  for (const Case& c : {Case{"nohost"}, Case{":7431"}, Case{"h:0"},
                        Case{"h:65536"}, Case{"h:port"}}) {
    SCOPED_TRACE(c.address);
    auto parsed = Parse({"--coordinator", c.address, "list"});
    ASSERT_FALSE(parsed.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(parsed.status()));
    EXPECT_THAT(parsed.status().message(), HasSubstr(c.address));
  }
}

// Regression: the CLI accepted "::1:7431" and "a b:1", which the worker
// refuses; both now share common/host_port.h.
TEST(ParseArgsTest, UnbracketedIpv6CoordinatorIsRefusedLikeTheWorker) {
  auto parsed = Parse({"--coordinator", "::1:7431", "list"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(), HasSubstr("in brackets"));
  auto bracketed = Parse({"--coordinator", "[::1]:7431", "list"});
  ASSERT_TRUE(bracketed.ok()) << bracketed.status();
  EXPECT_EQ(bracketed->coordinator, "[::1]:7431");
}

TEST(ParseArgsTest, CoordinatorHostWithSpaceIsRefusedLikeTheWorker) {
  auto parsed = Parse({"--coordinator", "a b:1", "list"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(), HasSubstr("bad character in host"));
}

TEST(ParseArgsTest, BadAddressFromEnvironmentSaysWhereItCameFrom) {
  auto parsed = Parse({"list"}, "oops");
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(), HasSubstr("SKERRY_COORDINATOR"));
}

TEST(ParseArgsTest, FlagsTakeValuesWithSpaceOrEquals) {
  auto parsed = Parse({"champion", "9", "--json", "--out=best.json"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_TRUE(parsed->Has("json"));
  EXPECT_EQ(parsed->Get("out"), "best.json");
  auto spaced = Parse({"history", "9", "--island", "2"});
  ASSERT_TRUE(spaced.ok()) << spaced.status();
  EXPECT_EQ(spaced->Get("island"), "2");
}

TEST(ParseArgsTest, UnknownCommandIsRejected) {
  auto parsed = Parse({"frobnicate"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(),
              HasSubstr("unknown command 'frobnicate'"));
}

TEST(ParseArgsTest, NoCommandIsRejected) {
  auto parsed = Parse({});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(), HasSubstr("no command"));
}

TEST(ParseArgsTest, UnknownFlagIsRejectedWithTheCommandName) {
  auto parsed = Parse({"show", "1", "--everything"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(),
              HasSubstr("show: unknown option '--everything'"));
}

TEST(ParseArgsTest, SwitchWithValueIsRejected) {
  auto parsed = Parse({"champion", "1", "--json=yes"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(), HasSubstr("--json takes no value"));
}

TEST(ParseArgsTest, FlagMissingItsValueIsRejected) {
  auto parsed = Parse({"champion", "1", "--out"});
  ASSERT_FALSE(parsed.ok());
  EXPECT_THAT(parsed.status().message(),
              HasSubstr("--out needs a value: FILE"));
}

TEST(ParseArgsTest, MissingAndExtraPositionalsAreRejected) {
  auto missing = Parse({"show"});
  ASSERT_FALSE(missing.ok());
  EXPECT_THAT(missing.status().message(), HasSubstr("missing argument RUN"));
  auto extra = Parse({"show", "1", "2"});
  ASSERT_FALSE(extra.ok());
  EXPECT_THAT(extra.status().message(), HasSubstr("unexpected argument '2'"));
  auto none_taken = Parse({"list", "x"});
  ASSERT_FALSE(none_taken.ok());
  EXPECT_THAT(none_taken.status().message(), HasSubstr("it takes none"));
}

TEST(ParseArgsTest, LocalRequiresWorkersAndDb) {
  auto no_db = Parse({"local", "a.spec", "--workers", "2"});
  ASSERT_FALSE(no_db.ok());
  EXPECT_THAT(no_db.status().message(), HasSubstr("missing option --db FILE"));
  auto full = Parse({"local", "a.spec", "--workers", "2", "--db", "x.db"});
  ASSERT_TRUE(full.ok()) << full.status();
  EXPECT_EQ(full->Get("workers"), "2");
  EXPECT_EQ(full->Get("db"), "x.db");
}

TEST(ParseArgsTest, LocalIgnoresABadCoordinatorFromTheEnvironment) {
  auto parsed = Parse({"local", "a.spec", "--workers", "1", "--db", "x.db"},
                      "not-an-address");
  EXPECT_TRUE(parsed.ok()) << parsed.status();
}

TEST(ParseArgsTest, HelpFlagWinsOverMissingArguments) {
  auto parsed = Parse({"local", "--help"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_TRUE(parsed->help);
  EXPECT_EQ(parsed->command, "local");
}

TEST(ParseArgsTest, GlobalHelpMeansTheHelpCommand) {
  auto parsed = Parse({"--help"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->command, "help");
}

TEST(ParseArgsTest, DoubleDashEndsOptions) {
  auto parsed = Parse({"submit", "--", "--odd-name.spec"});
  ASSERT_TRUE(parsed.ok()) << parsed.status();
  EXPECT_EQ(parsed->positionals, std::vector<std::string>({"--odd-name.spec"}));
}

TEST(ParseRunIdTest, AcceptsPositiveIntegersOnly) {
  EXPECT_EQ(*ParseRunId("17"), 17u);
  EXPECT_EQ(*ParseRunId("18446744073709551615"), 18446744073709551615ull);
  for (const char* bad :
       {"0", "", "-1", "+3", "1.5", "12x", " 4", "18446744073709551616"}) {
    SCOPED_TRACE(bad);
    auto id = ParseRunId(bad);
    ASSERT_FALSE(id.ok());
    EXPECT_THAT(id.status().message(), HasSubstr("RUN must be a run id"));
  }
}

TEST(ParseBoundedUintTest, NamesTheFlagAndTheRange) {
  EXPECT_EQ(*ParseBoundedUint("--workers", "4", 1, 256), 4u);
  auto zero = ParseBoundedUint("--workers", "0", 1, 256);
  ASSERT_FALSE(zero.ok());
  EXPECT_EQ(zero.status().message(),
            "--workers must be an integer in [1, 256]; got '0'");
}

TEST(HelpTest, GeneralHelpListsEveryCommand) {
  std::string help = GeneralHelp();
  for (const CommandSpec& command : Commands()) {
    EXPECT_THAT(help, HasSubstr(std::string("  ") + command.name));
  }
  EXPECT_THAT(help, HasSubstr("SKERRY_COORDINATOR"));
}

TEST(HelpTest, CommandHelpShowsUsageWithRequiredAndOptionalFlags) {
  std::string help = CommandHelp(*FindCommand("local"));
  EXPECT_THAT(help,
              HasSubstr("usage: skerry local SPEC_FILE --workers N --db FILE "
                        "[--http HOST:PORT]"));
  EXPECT_THAT(help, HasSubstr("[--sandbox MODE]"));
  EXPECT_THAT(help, HasSubstr("[--evaluator-dirs DIRS]"));
  std::string champion = CommandHelp(*FindCommand("champion"));
  EXPECT_THAT(champion,
              HasSubstr("usage: skerry champion RUN [--json] [--out FILE]\n"));
}

TEST(HelpTest, HelpLinesFitInEightyColumns) {
  std::vector<std::string> texts = {GeneralHelp()};
  for (const CommandSpec& command : Commands()) {
    texts.push_back(CommandHelp(command));
  }
  for (const std::string& text : texts) {
    size_t start = 0;
    while (start < text.size()) {
      size_t end = text.find('\n', start);
      if (end == std::string::npos) end = text.size();
      EXPECT_LE(end - start, 80u) << text.substr(start, end - start);
      start = end + 1;
    }
  }
}

// Dispatch, `skerry help` and usage errors all come from the command table:
// a row without a handler would be listed but could not run.
TEST(CommandTableTest, EveryCommandHasAHandler) {
  for (const CommandSpec& command : Commands()) {
    SCOPED_TRACE(command.name);
    EXPECT_NE(command.handler, nullptr);
    EXPECT_NE(FindCommand(command.name), nullptr);
  }
}

TEST(CommandTableTest, OnlyHelpAndLocalGoWithoutTheCoordinatorAddress) {
  for (const CommandSpec& command : Commands()) {
    SCOPED_TRACE(command.name);
    const std::string name = command.name;
    EXPECT_EQ(command.reach == CommandReach::kCoordinator,
              name != "help" && name != "local");
  }
  // So a bad address stops `list` but not `help`.
  EXPECT_FALSE(Parse({"--coordinator", "nohost", "list"}).ok());
  EXPECT_TRUE(Parse({"--coordinator", "nohost", "help"}).ok());
}

// The shared HOST:PORT table (tests/unit/common/host_port_cases.h) through
// --coordinator: a client needs a port from 1 to 65535.
TEST(ParseArgsTest, CoordinatorFollowsTheSharedHostPortTable) {
  for (const skerry::testdata::HostPortCase& c :
       skerry::testdata::HostPortCases()) {
    SCOPED_TRACE(c.text);
    auto parsed = Parse({"--coordinator", c.text, "list"});
    ASSERT_EQ(parsed.ok(), c.client_ok) << parsed.status();
    if (parsed.ok()) {
      EXPECT_EQ(parsed->coordinator, c.text);
    } else {
      EXPECT_THAT(parsed.status().message(),
                  HasSubstr("coordinator address: expected HOST:PORT"));
      EXPECT_THAT(parsed.status().message(), HasSubstr(c.why));
    }
  }
}

}  // namespace
}  // namespace skerry::cli
