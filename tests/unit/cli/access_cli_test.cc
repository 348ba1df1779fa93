// The client side of access control: where the token comes from (flag, file,
// environment, config file, in that order), that errors never show it, the
// global options of `skerry`, and the token and audit tables.
#include <sys/stat.h>

#include <cstdlib>
#include <filesystem>
#include <fstream>
#include <map>
#include <string>

#include "cli/access.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "worker/channel.h"

namespace skerry::cli {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

class TempHome {
 public:
  TempHome() {
    char tmpl[] = "/tmp/skerry-home-XXXXXX";
    path_ = mkdtemp(tmpl);
  }
  ~TempHome() {
    std::error_code ignored;
    std::filesystem::remove_all(path_, ignored);
  }
  const std::string& path() const { return path_; }
  std::string Write(const std::string& rel, const std::string& text,
                    mode_t mode = 0600) {
    const std::string file = path_ + "/" + rel;
    std::error_code ignored;
    std::filesystem::create_directories(
        std::filesystem::path(file).parent_path(), ignored);
    std::ofstream(file) << text;
    chmod(file.c_str(), mode);
    return file;
  }

 private:
  std::string path_;
};

worker::Getenv Env(std::map<std::string, std::string> vars) {
  return [vars](const char* name) {
    auto it = vars.find(name);
    return it == vars.end() ? std::string() : it->second;
  };
}

TEST(ResolveTokenTest, FlagThenFileThenEnvironmentThenConfigFile) {
  TempHome home;
  const std::string file = home.Write("given.token", "from-file\n");
  home.Write(".config/skerry/token", "from-config\n");
  auto env = Env({{"SKERRY_TOKEN", "from-env"}, {"HOME", home.path()}});
  EXPECT_EQ(worker::ResolveToken("from-flag", file, env)->token, "from-flag");
  EXPECT_EQ(worker::ResolveToken("", file, env)->token, "from-file");
  EXPECT_EQ(worker::ResolveToken("", "", env)->token, "from-env");
  auto config = worker::ResolveToken("", "", Env({{"HOME", home.path()}}));
  ASSERT_TRUE(config.ok());
  EXPECT_EQ(config->token, "from-config");
  EXPECT_THAT(config->source, HasSubstr(".config/skerry/token"));
  auto none = worker::ResolveToken("", "", Env({{"HOME", home.path() + "/x"}}));
  ASSERT_TRUE(none.ok());
  EXPECT_EQ(none->token, "") << "no token anywhere is fine: none is sent";
}

TEST(ResolveTokenTest, ProblemsNameTheSourceNeverTheToken) {
  TempHome home;
  auto spaced = worker::ResolveToken("secret-part two", "", Env({}));
  ASSERT_FALSE(spaced.ok());
  EXPECT_THAT(std::string(spaced.status().message()), HasSubstr("--token"));
  EXPECT_THAT(std::string(spaced.status().message()),
              Not(HasSubstr("secret-part")));
  auto missing = worker::ResolveToken("", home.path() + "/nope", Env({}));
  EXPECT_EQ(missing.status().code(), absl::StatusCode::kNotFound);
  const std::string loose = home.Write("loose.token", "abc\n", 0644);
  auto warned = worker::ResolveToken("", loose, Env({}));
  ASSERT_TRUE(warned.ok());
  EXPECT_THAT(warned->warning, HasSubstr("chmod 600"));
  EXPECT_THAT(warned->warning, Not(HasSubstr("abc")));
}

TEST(AccessArgsTest, GlobalOptionsGoBeforeOrAfterTheCommand) {
  auto before =
      ParseArgs({"--token-file", "t", "--tls-ca", "ca.pem", "list"}, "");
  ASSERT_TRUE(before.ok()) << before.status();
  EXPECT_EQ(before->Global("token-file"), "t");
  EXPECT_EQ(before->Global("tls-ca"), "ca.pem");
  auto after = ParseArgs({"token", "create", "rita", "--role", "researcher",
                          "--tls-server-name=coord.lab"},
                         "");
  ASSERT_TRUE(after.ok()) << after.status();
  EXPECT_EQ(after->Global("tls-server-name"), "coord.lab");
  EXPECT_EQ(after->Get("role"), "researcher");
  EXPECT_EQ(after->positionals.size(), 2u);
}

TEST(AccessArgsTest, AMistypedTokenOptionIsNotEchoed) {
  auto bad = ParseArgs({"--tokn=skt_secretvalue", "list"}, "");
  ASSERT_FALSE(bad.ok());
  EXPECT_THAT(std::string(bad.status().message()), HasSubstr("--tokn"));
  EXPECT_THAT(std::string(bad.status().message()),
              Not(HasSubstr("secretvalue")));
}

TEST(RedactTest, HidesTheSecretsAndAnythingShapedLikeAToken) {
  Io io;
  io.secrets = {"hunter2"};
  const std::string token = "skt_" + std::string(64, 'a');
  const std::string out =
      Redact("bad hunter2 and " + token + " and skt_ab", io);
  EXPECT_THAT(out, Not(HasSubstr("hunter2")));
  EXPECT_THAT(out, Not(HasSubstr(std::string(64, 'a'))));
  EXPECT_THAT(out, HasSubstr("skt_ab")) << "too short to be a token";
}

TEST(AccessFormatTest, TablesShowTokensWithoutSecretsAndAuditOutcomes) {
  skerry::v1::TokenInfo t;
  t.set_id(3);
  t.set_principal("box1");
  t.set_role(skerry::v1::ROLE_WORKER);
  t.set_created_by("ada");
  t.set_note("rack 2");
  const std::string tokens = FormatTokens({t}, absl::UTCTimeZone());
  EXPECT_THAT(tokens, HasSubstr("box1"));
  EXPECT_THAT(tokens, HasSubstr("worker"));
  EXPECT_THAT(tokens, HasSubstr("rack 2"));
  skerry::v1::AuditEntry e;
  e.set_id(9);
  e.set_principal("rob");
  e.set_role(skerry::v1::ROLE_RESEARCHER);
  e.set_method("/skerry.v1.RunService/StopRun");
  e.set_run_id(4);
  e.set_ended(true);
  e.set_code(7);
  e.set_peer("ipv4:10.0.0.5:4242");
  const std::string audit = FormatAudit({e}, absl::UTCTimeZone());
  EXPECT_THAT(audit, HasSubstr("RunService/StopRun"));
  EXPECT_THAT(audit, HasSubstr("PERMISSION_DENIED"));
  EXPECT_THAT(audit, HasSubstr("ipv4:10.0.0.5:4242"));
  e.set_ended(false);
  EXPECT_THAT(FormatAudit({e}, absl::UTCTimeZone()), HasSubstr("unfinished"));
}

}  // namespace
}  // namespace skerry::cli
