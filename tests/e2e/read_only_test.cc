// `skerry-coordinator --read-only` end to end (issue 18): the real binaries on
// a finished database made by `skerry local`. Reads are served, every write
// call is refused with the read-only reason (the CLI prints it, a worker stops
// with exit code 1 instead of retrying), several read-only coordinators share
// the file while a writing one is refused, and the file's bytes are unchanged.
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/sha256.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;
using testing::RunCommand;

constexpr char kSpec[] = R"(
name: "read-only-source"
seed: 7
genome_length: 4
evaluator { builtin { function: "sphere" } }
ga {
  population_size: 8
  selection { method: TOURNAMENT tournament_size: 2 }
  crossover { method: UNIFORM rate: 0.9 }
  mutation { rate: 0.2 step: 0.3 }
  elites: 1
}
islands { count: 2 topology: RING interval: 2 migrants: 1 }
stop { max_generations: 6 }
)";

constexpr char kReadOnly[] = "coordinator is read-only (--read-only)";

std::string FileSha(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  const std::string bytes((std::istreambuf_iterator<char>(in)),
                          std::istreambuf_iterator<char>());
  Sha256 h;
  h.Update(bytes);
  return h.FinishHex();
}

class ReadOnlyTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("finished.db");
    spec_ = dir_.File("run.spec");
    ASSERT_TRUE(testing::WriteTextFile(spec_, kSpec));
    testing::CommandResult local = RunCommand(
        {SKERRY_CLI_BIN, "local", spec_, "--db", db_, "--workers", "1"},
        absl::Seconds(300));
    ASSERT_EQ(local.exit_code, 0) << local.output;
    digest_ = testing::DigestIn(local.output);
    ASSERT_FALSE(digest_.empty()) << local.output;
  }

  testing::StartedCoordinator StartReadOnly(const std::string& log) {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_, dir_.File(log), {"--read-only"});
    EXPECT_TRUE(c.ok()) << c.status();
    return std::move(*c);
  }

  testing::CommandResult Cli(const testing::StartedCoordinator& c,
                             std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     c.address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return RunCommand(argv);
  }

  testing::TempDir dir_;
  std::string db_;
  std::string spec_;
  std::string digest_;
};

TEST_F(ReadOnlyTest, ServesReadsRefusesEveryWriteAndLeavesTheFileUnchanged) {
  const std::string before = FileSha(db_);
  {
    testing::StartedCoordinator c = StartReadOnly("ro.log");
    EXPECT_THAT(c.process.Log(), HasSubstr("read-only (--read-only)"));

    // Reads.
    testing::CommandResult list = Cli(c, {"list"});
    EXPECT_EQ(list.exit_code, 0) << list.output;
    EXPECT_THAT(list.output, HasSubstr("read-only-source"));
    testing::CommandResult digest = Cli(c, {"digest", "1"});
    EXPECT_EQ(digest.exit_code, 0) << digest.output;
    EXPECT_EQ(testing::DigestIn(digest.output), digest_);
    for (std::vector<std::string> read : {std::vector<std::string>{"show", "1"},
                                          {"history", "1"},
                                          {"champion", "1"},
                                          {"descent", "1/best"},
                                          {"workers"}}) {
      testing::CommandResult r = Cli(c, read);
      EXPECT_EQ(r.exit_code, 0) << read[0] << ": " << r.output;
    }

    // Writes: refused with the reason, exit code 1 (not "unreachable", 3).
    const std::vector<std::vector<std::string>> writes = {
        {"submit", spec_},
        {"pause", "1"},
        {"resume", "1"},
        {"stop", "1"},
        {"priority", "1", "5"},
        {"backup", "1", "--to", dir_.File("copy.db")},
        {"token", "create", "ann", "--role", "viewer"},
    };
    for (const std::vector<std::string>& w : writes) {
      SCOPED_TRACE(w[0]);
      testing::CommandResult r = Cli(c, w);
      EXPECT_EQ(r.exit_code, 1) << r.output;
      EXPECT_THAT(r.output, HasSubstr(kReadOnly));
      EXPECT_THAT(r.output, Not(HasSubstr("cannot reach")));
    }

    // A worker is told why and stops at once (exit 1: its systemd unit does
    // not restart it), rather than retrying forever.
    absl::StatusOr<testing::Process> worker = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", c.address(), "--threads", "1"},
        dir_.File("worker.log"));
    ASSERT_TRUE(worker.ok()) << worker.status();
    absl::StatusOr<int> exit = worker->Wait(absl::Seconds(60));
    ASSERT_TRUE(exit.ok()) << "the worker kept trying:\n" << worker->Log();
    EXPECT_EQ(*exit, 1) << worker->Log();
    EXPECT_THAT(worker->Log(), HasSubstr(kReadOnly));

    // A second read-only coordinator shares the file; a writing one may not.
    testing::StartedCoordinator second = StartReadOnly("ro2.log");
    EXPECT_EQ(Cli(second, {"show", "1"}).exit_code, 0);
    testing::CommandResult writer = RunCommand(
        {SKERRY_COORDINATOR_BIN, "--db", db_, "--listen", "127.0.0.1:0"},
        absl::Seconds(60));
    EXPECT_EQ(writer.exit_code, 1) << writer.output;
    EXPECT_THAT(writer.output, HasSubstr("owned by"));

    for (testing::StartedCoordinator* p : {&c, &second}) {
      p->process.Signal(SIGTERM);
      absl::StatusOr<int> code = p->process.Wait(absl::Seconds(60));
      ASSERT_TRUE(code.ok());
      EXPECT_EQ(*code, 0) << p->process.Log();
    }
  }
  EXPECT_EQ(FileSha(db_), before) << "--read-only changed the database";
}

TEST_F(ReadOnlyTest, RefusedWhileAWritingCoordinatorOwnsTheFile) {
  absl::StatusOr<testing::StartedCoordinator> writer =
      testing::StartCoordinator(SKERRY_COORDINATOR_BIN, db_,
                                dir_.File("writer.log"));
  ASSERT_TRUE(writer.ok()) << writer.status();
  testing::CommandResult ro =
      RunCommand({SKERRY_COORDINATOR_BIN, "--db", db_, "--listen",
                  "127.0.0.1:0", "--read-only"},
                 absl::Seconds(60));
  EXPECT_EQ(ro.exit_code, 1) << ro.output;
  EXPECT_THAT(ro.output, HasSubstr("that writes it"));
  EXPECT_THAT(ro.output,
              HasSubstr(absl::StrCat("pid ", writer->process.pid())));
}

TEST_F(ReadOnlyTest, AMissingFileIsRefusedAndNotCreated) {
  const std::string missing = dir_.File("missing.db");
  testing::CommandResult ro =
      RunCommand({SKERRY_COORDINATOR_BIN, "--db", missing, "--listen",
                  "127.0.0.1:0", "--read-only"},
                 absl::Seconds(60));
  EXPECT_EQ(ro.exit_code, 1) << ro.output;
  EXPECT_THAT(ro.output, HasSubstr("creates nothing"));
  std::ifstream probe(missing);
  EXPECT_FALSE(probe.good()) << "--read-only created " << missing;
}

}  // namespace
}  // namespace skerry
