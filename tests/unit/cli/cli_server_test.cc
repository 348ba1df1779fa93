// The CLI against a real coordinator: over loopback TCP (port 0) with a real
// gRPC channel, and `skerry local` with everything in one process.
#include <unistd.h>

#include <cstdio>
#include <fstream>
#include <memory>
#include <sstream>
#include <string>
#include <thread>
#include <vector>

#include "absl/strings/numbers.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "cli/client.h"
#include "cli/commands.h"
#include "cli/local.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "google/protobuf/struct.pb.h"
#include "google/protobuf/util/json_util.h"
#include "grpcpp/create_channel.h"
#include "grpcpp/security/credentials.h"
#include "gtest/gtest.h"
#include "server/coordinator.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "worker/worker.h"

namespace skerry::cli {
namespace {

using ::testing::HasSubstr;
using ::testing::Not;

const std::string kQuickSpec =
    std::string(SKERRY_EXAMPLES_DIR) + "/sphere-quick.spec";

// Per process: ctest runs these tests in parallel processes.
std::string FreshDb(const std::string& name) {
  std::string path =
      absl::StrCat(::testing::TempDir(), "/", getpid(), "-", name);
  for (const char* suffix : {"", "-wal", "-shm"}) {
    std::remove((path + suffix).c_str());
  }
  return path;
}

struct Result {
  int code;
  std::string out;
  std::string err;
};

Result Cli(const std::vector<std::string>& args) {
  std::ostringstream out;
  std::ostringstream err;
  Io io;
  io.out = &out;
  io.err = &err;
  io.getenv = [](const char*) { return std::string(); };  // hermetic
  io.run_local = LocalCommand;
  ClientFactory factory = [](const std::string& target,
                             const worker::ClientSecurity&) {
    auto channel =
        grpc::CreateChannel(target, grpc::InsecureChannelCredentials());
    return std::make_unique<RunClient>(skerry::v1::RunService::NewStub(channel),
                                       target);
  };
  int code = RunCli(args, "", factory, io);
  return {code, out.str(), err.str()};
}

// A coordinator on a free loopback port with one in-process worker.
class CoordinatorFixture : public ::testing::Test {
 protected:
  void SetUp() override {
    server::CoordinatorOptions options;
    options.db_path = FreshDb("cli_server_test.db");
    options.listen_address = "127.0.0.1:0";
    auto started = server::Coordinator::Start(options);
    ASSERT_TRUE(started.ok()) << started.status();
    coordinator_ = *std::move(started);
    ASSERT_GT(coordinator_->port(), 0);
    target_ = absl::StrCat("127.0.0.1:", coordinator_->port());
    worker::WorkerOptions worker_options;
    worker_options.name = "cli-test-worker";
    worker_ = std::make_unique<worker::Worker>(
        skerry::v1::FleetService::NewStub(coordinator_->InProcessChannel()),
        worker_options, Clock::Real());
    worker_thread_ = std::thread([this] { worker_->Run().IgnoreError(); });
  }
  void TearDown() override {
    if (worker_ != nullptr) worker_->Stop();
    if (worker_thread_.joinable()) worker_thread_.join();
    if (coordinator_ != nullptr) coordinator_->Shutdown();
  }

  std::unique_ptr<server::Coordinator> coordinator_;
  std::string target_;
  std::unique_ptr<worker::Worker> worker_;
  std::thread worker_thread_;
};

TEST_F(CoordinatorFixture,
       RetriedSubmitWithTheSameRequestIdReturnsTheFirstRun) {
  absl::StatusOr<LoadedSpec> spec = LoadSpecFile(kQuickSpec);
  ASSERT_TRUE(spec.ok()) << spec.status();
  RunClient client(skerry::v1::RunService::NewStub(grpc::CreateChannel(
                       target_, grpc::InsecureChannelCredentials())),
                   target_);
  auto first = client.Submit(spec->spec, spec->text, 0, "retry-me");
  ASSERT_TRUE(first.ok()) << first.status();
  auto again = client.Submit(spec->spec, spec->text, 0, "retry-me");
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(again->id(), first->id());
  auto other = client.Submit(spec->spec, spec->text, 0, "another");
  ASSERT_TRUE(other.ok()) << other.status();
  EXPECT_NE(other->id(), first->id());
  auto listed = client.List();
  ASSERT_TRUE(listed.ok());
  EXPECT_EQ(listed->size(), 2u);
  auto bad = client.Submit(spec->spec, spec->text, 0, "has space");
  EXPECT_TRUE(absl::IsInvalidArgument(bad.status())) << bad.status();
}

TEST_F(CoordinatorFixture, SubmitWatchShowHistoryAndChampionOverLoopback) {
  Result submitted =
      Cli({"--coordinator", target_, "submit", kQuickSpec, "--watch"});
  ASSERT_EQ(submitted.code, kExitOk) << submitted.err;
  std::vector<std::string> lines = absl::StrSplit(submitted.out, '\n');
  uint64_t run = 0;
  ASSERT_TRUE(absl::SimpleAtoi(lines[0], &run)) << submitted.out;
  std::string id = absl::StrCat(run);
  EXPECT_THAT(submitted.out,
              HasSubstr(absl::StrCat("run ", id, " finished after")));

  Result listed = Cli({"--coordinator", target_, "list"});
  EXPECT_EQ(listed.code, kExitOk) << listed.err;
  EXPECT_THAT(listed.out, HasSubstr("sphere-quick"));

  Result shown = Cli({"--coordinator", target_, "show", id, "--all"});
  EXPECT_EQ(shown.code, kExitOk) << shown.err;
  EXPECT_THAT(shown.out, HasSubstr("state       finished\n"));
  EXPECT_THAT(shown.out, HasSubstr("EVALS  ISLANDS\n"));

  // sphere-quick.spec runs 5 generations on one island: header + 5 rows,
  // then the built-in's metrics (title, header + 5 rows).
  Result history =
      Cli({"--coordinator", target_, "history", id, "--island", "0"});
  EXPECT_EQ(history.code, kExitOk) << history.err;
  std::vector<std::string> rows =
      absl::StrSplit(history.out, '\n', absl::SkipEmpty());
  EXPECT_EQ(rows.size(), 13u) << history.out;
  EXPECT_THAT(history.out,
              HasSubstr("evaluator metrics, mean per generation:\n"));
  EXPECT_THAT(history.out, HasSubstr("distance_to_optimum"));

  Result champion = Cli({"--coordinator", target_, "champion", id, "--json"});
  ASSERT_EQ(champion.code, kExitOk) << champion.err;
  google::protobuf::Struct json;
  ASSERT_TRUE(
      google::protobuf::util::JsonStringToMessage(champion.out, &json).ok())
      << champion.out;
  EXPECT_EQ(json.fields().at("runId").string_value(), id);
  EXPECT_EQ(json.fields().at("specName").string_value(), "sphere-quick");
  const auto& genome = json.fields().at("genome").struct_value();
  EXPECT_EQ(genome.fields().at("genes").list_value().values_size(), 3);
}

TEST_F(CoordinatorFixture, UnknownRunIsExitOneWithTheServersMessage) {
  Result shown = Cli({"--coordinator", target_, "show", "999999"});
  EXPECT_EQ(shown.code, kExitFailure);
  EXPECT_THAT(shown.err, HasSubstr("skerry: GetRun: "));
}

TEST(CliWithoutCoordinatorTest, NothingListeningIsExitThree) {
  // Take a free port from a coordinator, then shut it down.
  server::CoordinatorOptions options;
  options.db_path = FreshDb("cli_gone_test.db");
  options.listen_address = "127.0.0.1:0";
  auto started = server::Coordinator::Start(options);
  ASSERT_TRUE(started.ok()) << started.status();
  std::string target = absl::StrCat("127.0.0.1:", (*started)->port());
  (*started)->Shutdown();
  started->reset();
  Result listed = Cli({"--coordinator", target, "list"});
  EXPECT_EQ(listed.code, kExitUnreachable);
  EXPECT_THAT(listed.err,
              HasSubstr("cannot reach the coordinator at " + target));
}

TEST(CliLocalTest, LocalRunsTheSpecToItsEndAndPrintsTheChampion) {
  std::string db = FreshDb("cli_local_test.db");
  Result local = Cli({"local", kQuickSpec, "--workers", "2", "--db", db});
  ASSERT_EQ(local.code, kExitOk) << local.err;
  EXPECT_THAT(local.out, HasSubstr("finished after"));
  EXPECT_THAT(local.out, HasSubstr("champion of run 1 \"sphere-quick\""));
  EXPECT_THAT(local.out, HasSubstr("genes (3)"));
}

TEST(CliLocalTest, LocalRejectsABadSpecBeforeStartingAnything) {
  std::string db = FreshDb("cli_local_bad.db");
  Result local =
      Cli({"local", "/nonexistent.spec", "--workers", "1", "--db", db});
  EXPECT_EQ(local.code, kExitUsage);
  EXPECT_THAT(local.err, HasSubstr("cannot read /nonexistent.spec"));
  EXPECT_FALSE(std::ifstream(db).good());
}

TEST(CliLocalTest, LocalRejectsZeroWorkers) {
  Result local = Cli({"local", kQuickSpec, "--workers", "0", "--db", "x.db"});
  EXPECT_EQ(local.code, kExitUsage);
  EXPECT_THAT(local.err, HasSubstr("--workers must be an integer in [1, 256]"));
}

// The observed bug: a run id past the signed range came back as
// "run -1 not found".
TEST_F(CoordinatorFixture, RunIdPastTheSignedRangeIsPrintedUnsigned) {
  Result shown =
      Cli({"--coordinator", target_, "show", "18446744073709551615"});
  EXPECT_EQ(shown.code, kExitFailure) << shown.err;
  EXPECT_THAT(shown.err, HasSubstr("run 18446744073709551615 not found"));
  EXPECT_THAT(shown.err, Not(HasSubstr("-1")));
}

// The observed bug: `skerry submit DIR` read the directory as an empty spec.
TEST_F(CoordinatorFixture, SubmittingADirectoryIsAUsageError) {
  Result submitted =
      Cli({"--coordinator", target_, "submit", ::testing::TempDir()});
  EXPECT_EQ(submitted.code, kExitUsage) << submitted.err;
  EXPECT_THAT(submitted.err, HasSubstr("is a directory, not a spec file"));
  Result listed = Cli({"--coordinator", target_, "list"});
  EXPECT_THAT(listed.out, Not(HasSubstr("run ")));  // nothing was submitted
}

// The observed bug: invalid UTF-8 in a spec ended in libprotobuf log lines and
// exit 1, after `local` had made its database.
TEST(CliLocalTest, InvalidUtf8SpecIsAUsageErrorNamingTheFieldAndMakesNoDb) {
  const std::string spec = ::testing::TempDir() + "/utf8.spec";
  {
    std::ofstream out(spec, std::ios::binary);
    out << "name: \"caf\xE9\"\ngenome_length: 2\n"
        << "evaluator { builtin { function: \"sphere\" } }\n";
  }
  std::string db = FreshDb("cli_local_utf8.db");
  Result local = Cli({"local", spec, "--workers", "1", "--db", db});
  EXPECT_EQ(local.code, kExitUsage) << local.err;
  EXPECT_THAT(local.err, HasSubstr("utf8.spec:1:11: name: not valid UTF-8"));
  EXPECT_FALSE(std::ifstream(db).good()) << "no database for a bad spec";
}

// The observed bug: a run whose every genome failed ended `finished` with no
// champion, and `local` exited 0 without saying why.
TEST(CliLocalTest, RunWhoseEveryEvaluationFailsEndsFailedAndLocalSaysWhy) {
  const std::string spec = ::testing::TempDir() + "/failing.spec";
  {
    std::ofstream out(spec);
    out << "name: \"always-fails\"\ngenome_length: 2\n"
        << "lower_bound: -1\nupper_bound: 1\nmax_attempts: 1\n"
        << "evaluator { external { argv: \"/bin/false\" } }\n"
        << "ga { population_size: 4 }\nstop { max_generations: 2 }\n";
  }
  std::string db = FreshDb("cli_local_failing.db");
  Result local = Cli({"local", spec, "--workers", "1", "--db", db});
  EXPECT_EQ(local.code, kExitFailure) << local.out << local.err;
  EXPECT_THAT(local.out, HasSubstr("run 1 failed"));
  EXPECT_THAT(local.out, HasSubstr("every evaluation failed"));
}

}  // namespace
}  // namespace skerry::cli
