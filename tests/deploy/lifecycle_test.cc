// The binaries as services see them, against a real coordinator on loopback:
// the worker protocol version checked at Join, a worker that leaves when idle
// (--exit-when-idle, as the Slurm script uses it), and SIGTERM, which systemd,
// Slurm and Kubernetes all send to stop a service.
#include <signal.h>

#include <chrono>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/version.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/fleet.grpc.pb.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using ::testing::HasSubstr;
using testing::Process;
using testing::RunCommand;

// 3 islands x 20 x 30 generations: long enough to be stopped in the middle.
constexpr char kSpec[] = R"(
name: "lifecycle"
seed: 160016
genome_length: 5
evaluator { builtin { function: "rastrigin" } }
ga { population_size: 20 elites: 1 }
islands { count: 3 topology: RING interval: 4 migrants: 1 }
stop { max_generations: 30 }
)";

class LifecycleTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("skerry.db");
    spec_ = dir_.File("lifecycle.spec");
    ASSERT_TRUE(testing::WriteTextFile(spec_, kSpec));
    StartCoordinator();
  }
  void StartCoordinator() {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_,
        dir_.File(absl::StrCat("coordinator", starts_++, ".log")),
        {"--lease-seconds", "5"});
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
  }
  CommandResult Cli(std::vector<std::string> args,
                    absl::Duration timeout = absl::Seconds(60)) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     coordinator_->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return RunCommand(argv, timeout);
  }
  absl::StatusOr<Process> StartWorker(const std::string& name,
                                      std::vector<std::string> extra = {}) {
    std::vector<std::string> argv = {SKERRY_WORKER_BIN,
                                     "--coordinator",
                                     coordinator_->address(),
                                     "--threads",
                                     "2",
                                     "--name",
                                     name};
    argv.insert(argv.end(), extra.begin(), extra.end());
    return Process::Start(argv, dir_.File(name + ".log"));
  }
  grpc::Status Join(uint32_t protocol, skerry::v1::JoinResponse* response) {
    auto stub = skerry::v1::FleetService::NewStub(grpc::CreateChannel(
        coordinator_->address(), grpc::InsecureChannelCredentials()));
    skerry::v1::JoinRequest request;
    request.set_name("probe");
    request.set_threads(1);
    request.set_version("9.8.7");
    request.set_protocol_version(protocol);
    grpc::ClientContext context;
    context.set_deadline(std::chrono::system_clock::now() +
                         std::chrono::seconds(20));
    return stub->Join(&context, request, response);
  }
  void ExpectCheckPasses() {
    CommandResult check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_});
    EXPECT_EQ(check.exit_code, 0) << check.output;
  }

  testing::TempDir dir_;
  std::string db_;
  std::string spec_;
  int starts_ = 0;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
};

TEST_F(LifecycleTest, JoinWithAnUnspokenProtocolIsRefusedNamingBothVersions) {
  skerry::v1::JoinResponse response;
  grpc::Status refused = Join(kProtocolVersion + 1, &response);
  EXPECT_EQ(refused.error_code(), grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_THAT(refused.error_message(),
              HasSubstr(absl::StrCat("worker protocol ", kProtocolVersion + 1,
                                     " (release \"9.8.7\")")));
  EXPECT_THAT(refused.error_message(),
              HasSubstr(absl::StrCat("release ", kVersion, ", worker protocol ",
                                     kMinProtocolVersion, " to ",
                                     kProtocolVersion, ")")));
  // Its own protocol is spoken, and the older ones down to the minimum. 0 (a
  // worker from before the field) is protocol 1, which sends no worker
  // secret: refused the same way.
  EXPECT_TRUE(Join(kProtocolVersion, &response).ok());
  EXPECT_TRUE(Join(kMinProtocolVersion, &response).ok());
  EXPECT_EQ(Join(kMinProtocolVersion - 1, &response).error_code(),
            grpc::StatusCode::UNIMPLEMENTED);
  EXPECT_EQ(Join(0, &response).error_code(), grpc::StatusCode::UNIMPLEMENTED);
}

TEST_F(LifecycleTest, WorkerWithExitWhenIdleLeavesAfterTheRunFinishes) {
  CommandResult submit = Cli({"submit", spec_});
  ASSERT_EQ(submit.exit_code, 0) << submit.output;
  absl::StatusOr<Process> worker =
      StartWorker("idle", {"--exit-when-idle", "2"});
  ASSERT_TRUE(worker.ok()) << worker.status();
  // The run needs the worker, so it finishes first; then the worker leaves.
  absl::StatusOr<int> code = worker->Wait(absl::Seconds(300));
  ASSERT_TRUE(code.ok()) << code.status() << "\n" << worker->Log();
  EXPECT_EQ(*code, 0) << worker->Log();
  EXPECT_THAT(worker->Log(), HasSubstr("no work for 2s (--exit-when-idle)"));
  CommandResult show = Cli({"show", "1"});
  EXPECT_THAT(show.output, HasSubstr("finished")) << show.output;
  ExpectCheckPasses();
}

TEST_F(LifecycleTest, SigtermStopsAWorkerAndAnotherFinishesTheRun) {
  ASSERT_EQ(Cli({"submit", spec_}).exit_code, 0);
  absl::StatusOr<Process> first = StartWorker("first");
  ASSERT_TRUE(first.ok()) << first.status();
  // Wait until a generation is complete: the worker is in full swing.
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        const CommandResult history = Cli({"history", "1"});
        return history.exit_code == 0 &&
               history.output.find("no complete generation") ==
                   std::string::npos;
      },
      absl::Seconds(60)));
  first->Signal(SIGTERM);
  absl::StatusOr<int> code = first->Wait(absl::Seconds(60));
  ASSERT_TRUE(code.ok()) << code.status() << "\n" << first->Log();
  EXPECT_EQ(*code, 0) << first->Log();
  EXPECT_THAT(first->Log(), HasSubstr("stopping"));

  absl::StatusOr<Process> second = StartWorker("second");
  ASSERT_TRUE(second.ok()) << second.status();
  CommandResult watch = Cli({"watch", "1"}, absl::Seconds(300));
  EXPECT_EQ(watch.exit_code, 0) << watch.output;
  EXPECT_THAT(Cli({"show", "1"}).output, HasSubstr("finished"));
  ExpectCheckPasses();
}

TEST_F(LifecycleTest, SigtermStopsTheCoordinatorCleanlyAndARestartResumes) {
  ASSERT_EQ(Cli({"submit", spec_}).exit_code, 0);
  absl::StatusOr<Process> worker = StartWorker("steady");
  ASSERT_TRUE(worker.ok()) << worker.status();
  ASSERT_TRUE(testing::WaitFor(
      [&] {
        return Cli({"show", "1"}).output.find("running") != std::string::npos;
      },
      absl::Seconds(60)));
  coordinator_->process.Signal(SIGTERM);
  absl::StatusOr<int> code = coordinator_->process.Wait(absl::Seconds(60));
  ASSERT_TRUE(code.ok()) << code.status() << "\n"
                         << coordinator_->process.Log();
  EXPECT_EQ(*code, 0) << coordinator_->process.Log();
  EXPECT_THAT(coordinator_->process.Log(), HasSubstr("shutting down"));
  ExpectCheckPasses();

  // The worker keeps retrying; a new coordinator on the same database (on a
  // new port) gets a new worker, and the run goes on from what was stored.
  worker->Signal(SIGTERM);
  ASSERT_TRUE(worker->Wait(absl::Seconds(60)).ok());
  StartCoordinator();
  absl::StatusOr<Process> again = StartWorker("again");
  ASSERT_TRUE(again.ok()) << again.status();
  CommandResult watch = Cli({"watch", "1"}, absl::Seconds(300));
  EXPECT_EQ(watch.exit_code, 0) << watch.output;
  EXPECT_THAT(Cli({"show", "1"}).output, HasSubstr("finished"));
  ExpectCheckPasses();
}

}  // namespace
}  // namespace skerry
