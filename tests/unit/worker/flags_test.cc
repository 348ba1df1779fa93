#include "worker/flags.h"

#include <cstdlib>
#include <string>
#include <vector>

#include "absl/status/status.h"
#include "absl/time/time.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/unit/common/host_port_cases.h"

namespace skerry::worker {
namespace {

using ::testing::HasSubstr;

TEST(WorkerFlagsTest, ParsesEveryFlagInBothForms) {
  absl::StatusOr<WorkerFlags> f =
      ParseWorkerFlags({"--coordinator", "lab-3.example:7431", "--threads=8",
                        "--name", "bench a", "--batch=64", "--wait-ms", "250"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_FALSE(f->help);
  EXPECT_EQ(f->coordinator, "lab-3.example:7431");
  EXPECT_EQ(f->options.threads, 8);
  EXPECT_EQ(f->options.name, "bench a");
  EXPECT_EQ(f->options.batch, 64u);
  EXPECT_EQ(f->options.wait, absl::Milliseconds(250));
}

TEST(WorkerFlagsTest, DefaultsApplyWhenOptionalFlagsAreAbsent) {
  absl::StatusOr<WorkerFlags> f =
      ParseWorkerFlags({"--coordinator=[::1]:9000", "--threads=1"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->coordinator, "[::1]:9000");
  EXPECT_EQ(f->options.name, "");   // the worker fills in host name and pid
  EXPECT_EQ(f->options.batch, 0u);  // the worker uses 4 x threads
  EXPECT_EQ(f->options.wait, WorkerOptions().wait);
}

TEST(WorkerFlagsTest, HelpWinsOverEverythingElse) {
  for (const char* help : {"--help", "-h"}) {
    SCOPED_TRACE(help);
    absl::StatusOr<WorkerFlags> f = ParseWorkerFlags({"--threads=x", help});
    // --threads=x is checked first and fails; help only after valid flags.
    EXPECT_FALSE(f.ok());
    f = ParseWorkerFlags({help, "--threads=x"});
    ASSERT_TRUE(f.ok()) << f.status();
    EXPECT_TRUE(f->help);
  }
}

TEST(WorkerFlagsTest, UsageExplainsWhatTheWorkerDoes) {
  const std::string usage = WorkerUsage();
  for (const char* word :
       {"--coordinator HOST:PORT", "--threads N", "--name", "--batch",
        "--wait-ms", "joins", "leases", "reports", "backoff", "next lease"}) {
    SCOPED_TRACE(word);
    EXPECT_THAT(usage, HasSubstr(word));
  }
}

struct BadCase {
  std::vector<std::string> args;
  std::string message;  // a substring of the error
};

TEST(WorkerFlagsTest, BadValuesAreRejectedWithTheFlagAndTheValue) {
  const std::vector<std::string> ok = {"--coordinator=h:1", "--threads=2"};
  auto with = [&](std::vector<std::string> extra) {
    std::vector<std::string> args = extra;
    for (const std::string& a : ok) {
      bool overridden = false;
      for (const std::string& e : extra) {
        overridden |= e.substr(0, e.find('=')) == a.substr(0, a.find('='));
      }
      if (!overridden) args.push_back(a);
    }
    return args;
  };
  const std::vector<BadCase> cases = {
      {with({"--threads=x"}),
       "--threads: expected a whole number from 1 to 1024, got \"x\""},
      {with({"--threads=0"}), "from 1 to 1024, got \"0\""},
      {with({"--threads=1025"}), "got \"1025\""},
      {with({"--threads=-3"}), "got \"-3\""},
      {with({"--threads= 4"}), "got \" 4\""},
      {with({"--threads=99999999999999999999999"}), "--threads: expected"},
      {with({"--batch=0"}),
       "--batch: expected a whole number from 1 to 100000"},
      {with({"--batch=1.5"}), "got \"1.5\""},
      {with({"--wait-ms=600001"}),
       "--wait-ms: expected a whole number from 0 to 600000"},
      {with({"--wait-ms="}), "got \"\""},
      {with({"--name="}), "--name: must not be empty"},
      {with({"--name=a\tb"}), "--name: must not contain control characters"},
      {with({"--name=" + std::string(300, 'n')}), "--name: at most 256"},
      {with({"--coordinator=localhost"}),
       "--coordinator: expected HOST:PORT (no port)"},
      {with({"--coordinator=:7431"}), "empty host"},
      {with({"--coordinator=h:0"}),
       "port must be a whole number from 1 to 65535"},
      {with({"--coordinator=h:65536"}), "65535"},
      {with({"--coordinator=h:port"}), "got \"h:port\""},
      {with({"--coordinator=::1:80"}), "must be in brackets"},
      {with({"--coordinator=[::1:80"}), "unbalanced brackets"},
      {{"--threads=2"}, "--coordinator HOST:PORT is required"},
      {{"--coordinator=h:1"}, "--threads N is required"},
      {with({"--colour=blue"}), "unknown flag \"--colour\""},
      {with({"stray"}), "unexpected argument \"stray\""},
      {{"--coordinator=h:1", "--threads"}, "--threads: missing value"},
      {{"--coordinator=h:1", "--threads=2", "--threads=3"},
       "--threads: given more than once"},
  };
  for (const BadCase& c : cases) {
    std::string joined;
    for (const std::string& a : c.args) joined += a + " ";
    SCOPED_TRACE(joined);
    absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(c.args);
    ASSERT_FALSE(f.ok());
    EXPECT_EQ(f.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(f.status().message(), HasSubstr(c.message));
  }
}

TEST(WorkerFlagsTest, ArgvFormSkipsTheProgramName) {
  std::vector<std::string> storage = {"skerry-worker", "--coordinator",
                                      "127.0.0.1:7431", "--threads", "3"};
  std::vector<char*> argv;
  for (std::string& s : storage) argv.push_back(s.data());
  absl::StatusOr<WorkerFlags> f =
      ParseWorkerFlags(static_cast<int>(argv.size()), argv.data());
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->options.threads, 3);
}

}  // namespace
}  // namespace skerry::worker

namespace skerry::worker {
namespace {

TEST(WorkerFlagsTest, TokenAndTlsFlagsAreKeptForTheChannel) {
  absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(std::vector<std::string>{
      "--coordinator", "coord.lab:7431", "--threads", "2", "--token-file",
      "/etc/skerry/worker.token", "--tls-ca=ca.pem", "--tls-cert", "w.pem",
      "--tls-key", "w.key", "--tls-server-name", "coord.lab"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->token_file, "/etc/skerry/worker.token");
  EXPECT_EQ(f->security.tls_ca_file, "ca.pem");
  EXPECT_EQ(f->security.tls_cert_file, "w.pem");
  EXPECT_EQ(f->security.tls_key_file, "w.key");
  EXPECT_EQ(f->security.tls_server_name, "coord.lab");
  // A client key pair without a CA cannot make a channel.
  WorkerFlags half = *f;
  half.security.tls_ca_file.clear();
  half.token_file.clear();
  std::string warning;
  auto channel = ConnectFromFlags(
      half, [](const char*) { return std::string(); }, &warning);
  EXPECT_EQ(channel.status().code(), absl::StatusCode::kInvalidArgument);
}

TEST(WorkerFlagsTest, AMistypedFlagDoesNotEchoItsValue) {
  absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(std::vector<std::string>{
      "--coordinator", "h:1", "--threads", "1", "--tokn", "skt_secretvalue"});
  ASSERT_FALSE(f.ok());
  EXPECT_THAT(std::string(f.status().message()),
              ::testing::Not(::testing::HasSubstr("secretvalue")));
}

TEST(WorkerFlagsTest, SandboxDefaultsToAutoAndTakesEvaluatorFolders) {
  absl::StatusOr<WorkerFlags> plain =
      ParseWorkerFlags({"--coordinator", "h:1", "--threads", "1"});
  ASSERT_TRUE(plain.ok()) << plain.status();
  EXPECT_EQ(plain->sandbox, SandboxMode::kAuto);
  EXPECT_TRUE(plain->evaluator_dirs.empty());
  absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(
      {"--coordinator", "h:1", "--threads", "1", "--sandbox=none",
       "--evaluator-dirs", "/opt/evaluators:/srv/models"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->sandbox, SandboxMode::kNone);
  EXPECT_EQ(f->evaluator_dirs,
            (std::vector<std::string>{"/opt/evaluators", "/srv/models"}));
  EXPECT_THAT(std::string(ParseWorkerFlags({"--coordinator", "h:1", "--threads",
                                            "1", "--sandbox", "off"})
                              .status()
                              .message()),
              HasSubstr("--sandbox: expected auto, bwrap or none"));
  EXPECT_THAT(std::string(ParseWorkerFlags({"--coordinator", "h:1", "--threads",
                                            "1", "--evaluator-dirs", "rel/dir"})
                              .status()
                              .message()),
              HasSubstr("--evaluator-dirs: expected absolute folders"));
  EXPECT_THAT(WorkerUsage(), HasSubstr("--sandbox MODE"));
}

// The token leaves argv and the environment once read, so /proc/PID/cmdline
// and /proc/PID/environ no longer show it.
TEST(WorkerFlagsTest, ScrubTokenOverwritesArgvAndTheEnvironment) {
  char prog[] = "skerry-worker";
  char flag[] = "--token";
  char value[] = "skt_secret";
  char joined[] = "--token=skt_other";
  char* argv[] = {prog, flag, value, joined, nullptr};
  setenv("SKERRY_TOKEN", "skt_env", 1);
  const char* env_value = std::getenv("SKERRY_TOKEN");
  ASSERT_NE(env_value, nullptr);
  ScrubTokenFromProcess(4, argv);
  EXPECT_EQ(std::string(value), "xxxxxxxxxx");
  EXPECT_EQ(std::string(joined), "--token=xxxxxxxxx");
  EXPECT_EQ(std::getenv("SKERRY_TOKEN"), nullptr);
}

TEST(WorkerFlagsTest, ExitWhenIdleTakesWholeSecondsInItsRange) {
  absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(
      {"--coordinator=h:1", "--threads=1", "--exit-when-idle", "300"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->options.exit_when_idle, absl::Seconds(300));
  f = ParseWorkerFlags({"--coordinator=h:1", "--threads=1"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_EQ(f->options.exit_when_idle, absl::ZeroDuration());  // never
  for (const char* bad : {"0", "-5", "1.5", "604801", "soon"}) {
    SCOPED_TRACE(bad);
    f = ParseWorkerFlags(
        {"--coordinator=h:1", "--threads=1", "--exit-when-idle", bad});
    ASSERT_FALSE(f.ok());
    EXPECT_THAT(f.status().message(), HasSubstr("--exit-when-idle"));
    EXPECT_THAT(f.status().message(), HasSubstr(bad));
  }
  EXPECT_THAT(WorkerUsage(), HasSubstr("--exit-when-idle SECONDS"));
}

TEST(WorkerFlagsTest, VersionNeedsNoOtherFlag) {
  absl::StatusOr<WorkerFlags> f = ParseWorkerFlags({"--version"});
  ASSERT_TRUE(f.ok()) << f.status();
  EXPECT_TRUE(f->version);
  EXPECT_THAT(WorkerUsage(), HasSubstr("--version"));
}

}  // namespace
}  // namespace skerry::worker

namespace skerry::worker {
namespace {

// The shared HOST:PORT table (tests/unit/common/host_port_cases.h) through
// --coordinator: a client needs a port from 1 to 65535.
TEST(WorkerFlagsTest, CoordinatorFollowsTheSharedHostPortTable) {
  for (const skerry::testdata::HostPortCase& c :
       skerry::testdata::HostPortCases()) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<WorkerFlags> f = ParseWorkerFlags(
        std::vector<std::string>{"--coordinator", c.text, "--threads", "1"});
    ASSERT_EQ(f.ok(), c.client_ok) << f.status();
    if (f.ok()) {
      EXPECT_EQ(f->coordinator, c.text);
    } else {
      EXPECT_THAT(f.status().message(),
                  HasSubstr("--coordinator: expected HOST:PORT"));
      EXPECT_THAT(f.status().message(), HasSubstr(c.why));
    }
  }
}

}  // namespace
}  // namespace skerry::worker
