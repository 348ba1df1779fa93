// The evaluator sandbox (worker/sandbox.h). The regression test runs a real
// coordinator and a real skerry-worker with --sandbox bwrap, and a hostile
// evaluator (programs/thief.py) that tries every route it knows to the
// worker's token: the token file (placed in the evaluator's own folder), the
// config folder, /proc/<ppid>/cmdline|environ|mem, every process in /proc,
// inherited descriptors and its environment. It must find nothing. The same
// evaluator under --sandbox none finds the token, so the test can fail.
#include "worker/sandbox.h"

#include <signal.h>
#include <stdlib.h>
#include <sys/stat.h>

#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/escaping.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_replace.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"
#include "worker/process_evaluator.h"

namespace skerry::worker {
namespace {

using ::testing::Contains;
using ::testing::HasSubstr;
using ::testing::Not;

// A well-formed token (server/auth/tokens.h: skt_ and 64 hex digits) that
// exists only in this test; the coordinator runs without access control,
// so the worker sends it and nobody checks it.
std::string CanaryToken() {
  std::string bytes(32, '\0');
  std::ifstream random("/dev/urandom", std::ios::binary);
  random.read(bytes.data(), static_cast<std::streamsize>(bytes.size()));
  return "skt_" + absl::BytesToHexString(bytes);
}

// Why bwrap cannot run here, or "" when it can.
std::string BwrapUnavailable() {
  std::string warning;
  absl::StatusOr<std::shared_ptr<const Sandbox>> s =
      SetUpSandbox(SandboxMode::kBwrap, {}, {}, &warning);
  return s.ok() ? "" : std::string(s.status().message());
}

constexpr char kThiefSpec[] = R"(
name: "thief"
seed: 5
genome_length: 2
lower_bound: -1
upper_bound: 1
evaluator {
  external { argv: "python3" argv: "PROGRAM" argv: "TOKEN_FILE"
             argv: "CONFIG_TOKEN" }
  time_limit_seconds: 60
}
max_attempts: 1
ga { population_size: 4 }
stop { max_generations: 1 }
)";

class TokenTheftTest : public ::testing::Test {
 protected:
  // Runs the thief under a worker started with `sandbox_flag` and returns
  // the error text stored for its first genome.
  std::string RunThief(const std::string& sandbox_flag) {
    // The program's folder holds the token file too: the sandbox must cover
    // it up although the folder itself is visible.
    const std::string prog = dir_.File("prog");
    const std::string home = dir_.File("home");
    mkdir(prog.c_str(), 0755);
    mkdir(home.c_str(), 0755);
    mkdir((home + "/.config").c_str(), 0755);
    mkdir((home + "/.config/skerry").c_str(), 0700);
    const std::string program = prog + "/thief.py";
    const std::string token_file = prog + "/worker.token";
    const std::string config_token = home + "/.config/skerry/token";
    {
      std::ifstream in(std::string(SKERRY_TEST_PROGRAMS_DIR) + "/thief.py");
      std::ofstream(program) << in.rdbuf();
    }
    EXPECT_TRUE(testing::WriteTextFile(token_file, token_ + "\n"));
    EXPECT_TRUE(testing::WriteTextFile(config_token, token_ + "\n"));
    chmod(token_file.c_str(), 0600);
    chmod(config_token.c_str(), 0600);

    const std::string db = dir_.File("skerry.db");
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db, dir_.File("coordinator.log"));
    EXPECT_TRUE(c.ok()) << c.status();
    if (!c.ok()) return "";
    const std::string spec_path = dir_.File("thief.spec");
    EXPECT_TRUE(testing::WriteTextFile(
        spec_path,
        absl::StrReplaceAll(kThiefSpec, {{"PROGRAM", program},
                                         {"TOKEN_FILE", token_file},
                                         {"CONFIG_TOKEN", config_token}})));
    testing::CommandResult submitted = testing::RunCommand(
        {SKERRY_CLI_BIN, "--coordinator", c->address(), "submit", spec_path});
    EXPECT_EQ(submitted.exit_code, 0) << submitted.output;

    // The worker finds its config folder through HOME and also has the
    // token in its environment: both are routes the thief tries.
    setenv("HOME", home.c_str(), 1);
    setenv("SKERRY_TOKEN", token_.c_str(), 1);
    absl::StatusOr<testing::Process> worker = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", c->address(), "--threads", "1",
         "--token-file", token_file, "--sandbox", sandbox_flag,
         "--evaluator-dirs", dir_.path()},
        dir_.File("worker.log"));
    unsetenv("SKERRY_TOKEN");
    EXPECT_TRUE(worker.ok()) << worker.status();
    if (!worker.ok()) return "";
    std::string error;
    const bool stored = testing::WaitFor(
        [&] {
          error = testing::QueryText(
              db, "SELECT error FROM genomes WHERE error != '' LIMIT 1");
          return !error.empty();
        },
        absl::Seconds(120));
    EXPECT_TRUE(stored) << worker->Log();
    sandbox_state_ = testing::QueryText(db, "SELECT sandbox FROM workers");
    worker->Signal(SIGTERM);
    EXPECT_EQ(*worker->Wait(absl::Seconds(60)), 0) << worker->Log();
    return error;
  }

  // `skerry local` (in-process workers) with `sandbox_flag`: the thief is
  // given a token file outside its folder, and the token is in the local
  // process's environment. Returns the error text stored for a genome.
  std::string RunThiefLocally(const std::string& sandbox_flag) {
    const std::string prog = dir_.File("prog");
    const std::string outside = dir_.File("outside");
    mkdir(prog.c_str(), 0755);
    mkdir(outside.c_str(), 0755);
    const std::string program = prog + "/thief.py";
    const std::string token_file = outside + "/secret.token";
    {
      std::ifstream in(std::string(SKERRY_TEST_PROGRAMS_DIR) + "/thief.py");
      std::ofstream(program) << in.rdbuf();
    }
    EXPECT_TRUE(testing::WriteTextFile(token_file, token_ + "\n"));
    const std::string spec_path = dir_.File("thief.spec");
    EXPECT_TRUE(testing::WriteTextFile(
        spec_path,
        absl::StrReplaceAll(kThiefSpec, {{"PROGRAM", program},
                                         {"TOKEN_FILE", token_file},
                                         {"CONFIG_TOKEN", dir_.File("db")}})));
    const std::string db = dir_.File("local.db");
    setenv("SKERRY_TOKEN", token_.c_str(), 1);
    local_ = testing::RunCommand(
        {SKERRY_CLI_BIN, "local", spec_path, "--workers", "1", "--db", db,
         "--sandbox", sandbox_flag, "--evaluator-dirs", prog},
        absl::Seconds(180));
    unsetenv("SKERRY_TOKEN");
    return testing::QueryText(
        db, "SELECT error FROM genomes WHERE error != '' LIMIT 1");
  }

  testing::TempDir dir_;
  const std::string token_ = CanaryToken();
  testing::CommandResult local_;
  std::string sandbox_state_;
};

TEST_F(TokenTheftTest, ExternalEvaluatorCannotStealTheWorkersToken) {
  if (const std::string why = BwrapUnavailable(); !why.empty()) {
    GTEST_SKIP() << "bubblewrap cannot run on this machine, so the sandbox "
                    "cannot be tested here: "
                 << why;
  }
  const std::string error = RunThief("bwrap");
  EXPECT_THAT(error, HasSubstr("thief tried"));
  EXPECT_THAT(error, HasSubstr("found: nothing"));
  EXPECT_THAT(error, Not(HasSubstr(token_)));
  EXPECT_EQ(sandbox_state_, "bwrap");
}

// The control: without a sandbox the same program does get the token (from
// the token file at least), so the test above would see a leak.
TEST_F(TokenTheftTest, WithoutASandboxTheSameEvaluatorFindsTheToken) {
  const std::string error = RunThief("none");
  EXPECT_THAT(error, HasSubstr(token_));
  EXPECT_THAT(error, HasSubstr("file "));
  EXPECT_EQ(sandbox_state_, "none: --sandbox none");
}

// `skerry local` ran external evaluators with no sandbox at all.
TEST_F(TokenTheftTest, LocalRunsEvaluatorsInTheSandboxOutOfReachOfOtherFiles) {
  if (const std::string why = BwrapUnavailable(); !why.empty()) {
    GTEST_SKIP() << "bubblewrap cannot run on this machine: " << why;
  }
  const std::string error = RunThiefLocally("bwrap");
  EXPECT_THAT(error, HasSubstr("thief tried")) << local_.output;
  EXPECT_THAT(error, HasSubstr("found: nothing"));
  EXPECT_THAT(error, Not(HasSubstr(token_)));
}

// The control: under `local --sandbox none` the same program reads the file
// outside its folder (and the token in the local process's environment).
TEST_F(TokenTheftTest, LocalWithSandboxNoneLetsTheSameEvaluatorReadOutside) {
  const std::string error = RunThiefLocally("none");
  EXPECT_THAT(error, HasSubstr(token_)) << local_.output;
  EXPECT_THAT(error, HasSubstr("file "));
}

TEST(SandboxTest, ChildEnvironmentIsScrubbed) {
  const std::vector<std::string> parent = {
      "PATH=/opt/x/bin:/usr/bin", "SKERRY_TOKEN=skt_secret",
      "HOME=/home/ada",           "LC_ALL=C.UTF-8",
      "AWS_SECRET_ACCESS_KEY=k",  "LANG=en_GB.UTF-8"};
  const std::vector<std::string> plain =
      ScrubbedEnvironment(parent, {{"MODEL", "big"}}, /*sandboxed=*/false);
  EXPECT_THAT(plain, Contains("PATH=/opt/x/bin:/usr/bin"));
  EXPECT_THAT(plain, Contains("HOME=/home/ada"));
  EXPECT_THAT(plain, Contains("LC_ALL=C.UTF-8"));
  EXPECT_THAT(plain, Contains("LANG=en_GB.UTF-8"));
  EXPECT_THAT(plain, Contains("MODEL=big"));
  for (const std::string& e : plain) {
    EXPECT_THAT(e, Not(HasSubstr("SKERRY_TOKEN")));
    EXPECT_THAT(e, Not(HasSubstr("AWS_SECRET")));
  }
  const std::vector<std::string> boxed =
      ScrubbedEnvironment(parent, {}, /*sandboxed=*/true);
  EXPECT_THAT(boxed, Contains("HOME=/tmp"));
  EXPECT_THAT(boxed, Contains("PATH=/usr/local/bin:/usr/bin:/bin"));
}

TEST(SandboxTest, ModeParsesAndNamesTheFlag) {
  EXPECT_EQ(*ParseSandboxMode("auto"), SandboxMode::kAuto);
  EXPECT_EQ(*ParseSandboxMode("bwrap"), SandboxMode::kBwrap);
  EXPECT_EQ(*ParseSandboxMode("none"), SandboxMode::kNone);
  EXPECT_THAT(std::string(ParseSandboxMode("docker").status().message()),
              HasSubstr("--sandbox: expected auto, bwrap or none"));
}

TEST(SandboxTest, SecretInsideAProgramFolderIsCoveredUp) {
  if (const std::string why = BwrapUnavailable(); !why.empty()) {
    GTEST_SKIP() << "bubblewrap cannot run here: " << why;
  }
  testing::TempDir dir;
  const std::string secret = dir.File("token");
  const std::string program = dir.File("evaluate");
  ASSERT_TRUE(testing::WriteTextFile(secret, "skt_x\n"));
  ASSERT_TRUE(testing::WriteTextFile(program, "#!/bin/sh\n"));
  std::string warning;
  absl::StatusOr<std::shared_ptr<const Sandbox>> s = SetUpSandbox(
      SandboxMode::kBwrap, {secret, "/nonexistent/x"}, {dir.path()}, &warning);
  ASSERT_TRUE(s.ok()) << s.status();
  absl::StatusOr<std::vector<std::string>> argv =
      (*s)->Wrap(program, {"evaluate"}, "", /*network=*/false);
  ASSERT_TRUE(argv.ok()) << argv.status();
  const std::string joined = absl::StrJoin(*argv, " ");
  EXPECT_THAT(joined, HasSubstr(absl::StrCat("--ro-bind ", dir.path(), " ",
                                             dir.path())));
  EXPECT_THAT(joined, HasSubstr(absl::StrCat("--ro-bind /dev/null ", secret)));
  EXPECT_THAT(joined, Not(HasSubstr("/nonexistent/x")));
  EXPECT_THAT(joined, Not(HasSubstr("--share-net")));
  EXPECT_THAT(joined, HasSubstr("--unshare-all"));
  EXPECT_THAT(joined, HasSubstr("--die-with-parent"));
}

// A sandboxed child: its folder is read-only, /tmp is its own, and the
// worker's files elsewhere do not exist for it.
TEST(SandboxTest, SandboxedProgramSeesItsFolderReadOnlyAndAPrivateTmp) {
  if (const std::string why = BwrapUnavailable(); !why.empty()) {
    GTEST_SKIP() << "bubblewrap cannot run here: " << why;
  }
  testing::TempDir prog;
  testing::TempDir elsewhere;
  // Named on the command line, yet outside the evaluator folders.
  const std::string outside = elsewhere.File("worker-file");
  ASSERT_TRUE(testing::WriteTextFile(outside, "private\n"));
  const std::string script = prog.File("probe.py");
  ASSERT_TRUE(testing::WriteTextFile(
      script,
      "import json, os, sys\n"
      "def can_write(p):\n"
      "    try:\n"
      "        open(p, 'w').write('x'); return 1\n"
      "    except OSError:\n"
      "        return 0\n"
      "for line in sys.stdin:\n"
      "    r = json.loads(line)\n"
      "    m = {'own_folder_writable': can_write(os.path.dirname(__file__) "
      "+ '/w'),\n"
      "         'tmp_writable': can_write('/tmp/scratch'),\n"
      "         'outside_visible': int(os.path.exists(sys.argv[1])),\n"
      "         'pids': len([p for p in os.listdir('/proc') if "
      "p.isdigit()])}\n"
      "    print(json.dumps({'id': r['id'], 'score': 1.0, 'metrics': m}), "
      "flush=True)\n"));
  std::string warning;
  absl::StatusOr<std::shared_ptr<const Sandbox>> s =
      SetUpSandbox(SandboxMode::kBwrap, {}, {prog.path()}, &warning);
  ASSERT_TRUE(s.ok()) << s.status();
  ProcessEvaluatorOptions o;
  o.argv = {"python3", script, outside};
  o.sandbox = *s;
  o.time_limit = absl::Seconds(60);
  absl::StatusOr<std::unique_ptr<ProcessEvaluator>> e =
      ProcessEvaluator::Create(o);
  ASSERT_TRUE(e.ok()) << e.status();
  absl::StatusOr<double> score = (*e)->Evaluate({1.0}, 1);
  ASSERT_TRUE(score.ok()) << score.status();
  const auto& m = (*e)->last_metrics();
  EXPECT_EQ(m.at("own_folder_writable"), 0.0);
  EXPECT_EQ(m.at("tmp_writable"), 1.0);
  EXPECT_EQ(m.at("outside_visible"), 0.0);
  // Its own pid namespace: bwrap's init and the program, nothing else.
  EXPECT_LE(m.at("pids"), 3.0);
  EXPECT_FALSE(std::ifstream(prog.File("w")).good());
}

// A spec cannot have the sandbox show a folder of the worker's by naming a
// program or a file there: only the evaluator folders are ever shown.
TEST(SandboxTest, ProgramOutsideTheEvaluatorFoldersIsRefused) {
  if (const std::string why = BwrapUnavailable(); !why.empty()) {
    GTEST_SKIP() << "bubblewrap cannot run here: " << why;
  }
  testing::TempDir allowed;
  testing::TempDir other;
  const std::string program = other.File("evaluate");
  const std::string secret = other.File("id_key");
  ASSERT_TRUE(testing::WriteTextFile(program, "#!/bin/sh\n"));
  ASSERT_TRUE(testing::WriteTextFile(secret, "private\n"));
  std::string warning;
  absl::StatusOr<std::shared_ptr<const Sandbox>> s =
      SetUpSandbox(SandboxMode::kBwrap, {}, {allowed.path()}, &warning);
  ASSERT_TRUE(s.ok()) << s.status();
  absl::StatusOr<std::vector<std::string>> refused =
      (*s)->Wrap(program, {"evaluate"}, "", false);
  ASSERT_FALSE(refused.ok());
  EXPECT_THAT(std::string(refused.status().message()),
              HasSubstr("evaluator.external.argv[0]"));
  EXPECT_THAT(std::string(refused.status().message()),
              HasSubstr("outside the folders"));
  absl::StatusOr<std::vector<std::string>> python =
      (*s)->Wrap("/usr/bin/python3", {"python3", secret}, "", false);
  ASSERT_TRUE(python.ok()) << python.status();
  EXPECT_THAT(absl::StrJoin(*python, " "),
              Not(HasSubstr(absl::StrCat("--ro-bind ", other.path()))));
}

}  // namespace
}  // namespace skerry::worker
