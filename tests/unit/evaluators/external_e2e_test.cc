// End to end with real processes: a skerry-coordinator on a free loopback
// port, one skerry-worker, and external evaluators the worker runs itself: the
// Python greenhouse example to a finished run, and a program that crashes on
// half the genomes, which must fail those genomes and nothing else.
#include <fstream>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

// examples/external-python.spec, smaller, with the script's absolute path.
constexpr char kGreenhouseSpec[] = R"(
name: "greenhouse-e2e"
seed: 11
genome_length: 4
lower_bound: -2
upper_bound: 2
evaluator {
  external { argv: "python3" argv: "SCRIPT" }
  episodes { count: 2 }
  time_limit_seconds: 60
}
ga { population_size: 8 mutation { rate: 0.5 step: 0.2 } }
stop { max_generations: 4 }
)";

// Genomes whose first gene is negative crash the program (behave.py flaky).
constexpr char kFlakySpec[] = R"(
name: "flaky-e2e"
seed: 12
genome_length: 2
lower_bound: -1
upper_bound: 1
evaluator {
  external { argv: "python3" argv: "SCRIPT" argv: "flaky" }
  time_limit_seconds: 60
}
max_attempts: 2
ga { population_size: 8 }
stop { max_generations: 3 }
)";

class ExternalEndToEndTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("skerry.db");
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_, dir_.File("coordinator.log"));
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    stub_ = skerry::v1::RunService::NewStub(grpc::CreateChannel(
        coordinator_->address(), grpc::InsecureChannelCredentials()));
  }

  void Submit(const std::string& text) {
    const std::string path = dir_.File("run.spec");
    std::ofstream(path) << text;
    testing::CommandResult r =
        testing::RunCommand({SKERRY_CLI_BIN, "--coordinator",
                             coordinator_->address(), "submit", path});
    ASSERT_EQ(r.exit_code, 0) << r.output;
  }

  void StartWorker() {
    absl::StatusOr<testing::Process> w = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", coordinator_->address(),
         "--threads", "2", "--name", "e2e", "--evaluator-dirs",
         absl::StrCat(SKERRY_EXAMPLES_DIR, ":", SKERRY_TEST_PROGRAMS_DIR)},
        dir_.File("worker.log"));
    ASSERT_TRUE(w.ok()) << w.status();
    worker_ = std::make_unique<testing::Process>(std::move(*w));
  }

  skerry::v1::GetRunResponse WaitFinished(uint64_t id) {
    skerry::v1::GetRunResponse run;
    const bool finished = testing::WaitFor(
        [&] {
          grpc::ClientContext ctx;
          ctx.set_deadline(std::chrono::system_clock::now() +
                           std::chrono::seconds(10));
          skerry::v1::RunRef ref;
          ref.set_run_id(id);
          stub_->GetRun(&ctx, ref, &run);
          return run.run().state() == skerry::v1::FINISHED;
        },
        absl::Seconds(300));
    EXPECT_TRUE(finished) << run.DebugString() << "\nworker:\n"
                          << worker_->Log() << "\ncoordinator:\n"
                          << coordinator_->process.Log();
    return run;
  }

  testing::TempDir dir_;
  std::string db_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::unique_ptr<skerry::v1::RunService::Stub> stub_;
  std::unique_ptr<testing::Process> worker_;
};

TEST_F(ExternalEndToEndTest, PythonGreenhouseExampleRunFinishes) {
  Submit(absl::StrReplaceAll(
      kGreenhouseSpec, {{"SCRIPT", std::string(SKERRY_EXAMPLES_DIR) +
                                       "/evaluators/greenhouse_vents.py"}}));
  StartWorker();
  skerry::v1::GetRunResponse run = WaitFinished(1);
  const std::vector<testing::StoredGenome> genomes =
      testing::ReadGenomes(db_, 1);
  ASSERT_EQ(genomes.size(), 8u * 4u);
  for (const testing::StoredGenome& g : genomes) {
    SCOPED_TRACE(absl::StrCat("genome ", g.id));
    EXPECT_EQ(g.eval_state, skerry::v1::EVALUATED);
    EXPECT_TRUE(g.has_score);
    EXPECT_GE(g.score, 0.0);  // squared discomfort plus wear
  }
  ASSERT_TRUE(run.run().has_best());
  EXPECT_GE(run.run().best_score(), 0.0);
}

TEST_F(ExternalEndToEndTest,
       CrashingProgramFailsOnlyItsGenomesAndTheRunGoesOn) {
  Submit(absl::StrReplaceAll(
      kFlakySpec,
      {{"SCRIPT", std::string(SKERRY_TEST_PROGRAMS_DIR) + "/behave.py"}}));
  StartWorker();
  WaitFinished(1);
  const std::vector<testing::StoredGenome> genomes =
      testing::ReadGenomes(db_, 1);
  ASSERT_EQ(genomes.size(), 8u * 3u);
  int failed = 0;
  int evaluated = 0;
  for (const testing::StoredGenome& g : genomes) {
    if (g.eval_state == skerry::v1::FAILED) ++failed;
    if (g.eval_state == skerry::v1::EVALUATED) ++evaluated;
  }
  // Gene 0 is uniform in [-1, 1] at first, so some of each are all but certain
  // (seeded: the same every time).
  EXPECT_GT(failed, 0);
  EXPECT_GT(evaluated, 0);
  EXPECT_EQ(failed + evaluated, 24);
  EXPECT_THAT(testing::QueryText(
                  db_, "SELECT error FROM genomes WHERE error != '' LIMIT 1"),
              HasSubstr("simulated crash in the model"));
  // The worker is still alive and working for the coordinator.
  EXPECT_EQ(worker_->Wait(absl::Milliseconds(1)).status().code(),
            absl::StatusCode::kDeadlineExceeded);
}

}  // namespace
}  // namespace skerry
