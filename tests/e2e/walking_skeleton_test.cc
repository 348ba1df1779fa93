// End to end with real processes: the skerry-coordinator binary on a free
// loopback port with a SQLite file in a temporary folder, two skerry-worker
// processes, and the skerry CLI, running Rastrigin in 10 dimensions to its stop
// condition.
#include <map>
#include <string>

#include "absl/strings/str_cat.h"
#include "common/evaluator.h"
#include "common/genes.h"
#include "common/random.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::ReadGenomes;
using testing::RunCommand;
using testing::StoredGenome;

constexpr char kRastriginSpec[] = R"(
name: "rastrigin-10"
seed: 20261201
genome_length: 10
evaluator { builtin { function: "rastrigin" } }
ga {
  population_size: 30
  selection { method: TOURNAMENT tournament_size: 3 }
  crossover { method: UNIFORM rate: 0.9 }
  mutation { rate: 0.15 step: 0.3 }
  elites: 1
  immigrants: 1
}
islands { count: 2 topology: RING interval: 5 migrants: 2 }
stop { max_generations: 40 }
)";

class WalkingSkeletonTest : public ::testing::Test {
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

  std::vector<std::string> Cli(std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     coordinator_->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return argv;
  }

  skerry::v1::GetRunResponse GetRun(uint64_t id) {
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() +
                     std::chrono::seconds(10));
    skerry::v1::RunRef ref;
    ref.set_run_id(id);
    skerry::v1::GetRunResponse resp;
    stub_->GetRun(&ctx, ref, &resp);
    return resp;
  }

  testing::TempDir dir_;
  std::string db_;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::unique_ptr<skerry::v1::RunService::Stub> stub_;
};

TEST_F(WalkingSkeletonTest,
       RastriginRunFinishesWithAChampionBetterThanRandomSearch) {
  const std::string spec = dir_.File("rastrigin.spec");
  ASSERT_TRUE(testing::WriteTextFile(spec, kRastriginSpec));
  testing::CommandResult submit = RunCommand(Cli({"submit", spec}));
  ASSERT_EQ(submit.exit_code, 0) << submit.output;

  std::vector<testing::Process> workers;
  for (int i = 0; i < 2; ++i) {
    absl::StatusOr<testing::Process> w = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", coordinator_->address(),
         "--threads", "1", "--name", absl::StrCat("w", i)},
        dir_.File(absl::StrCat("worker", i, ".log")));
    ASSERT_TRUE(w.ok()) << w.status();
    workers.push_back(std::move(*w));
  }
  skerry::v1::GetRunResponse run;
  const bool finished = testing::WaitFor(
      [&] {
        run = GetRun(1);
        return run.run().state() == skerry::v1::FINISHED;
      },
      absl::Seconds(240));
  ASSERT_TRUE(finished) << run.DebugString() << "\ncoordinator:\n"
                        << coordinator_->process.Log() << "\nworker 0:\n"
                        << workers[0].Log();

  // What the database holds, read independently of the coordinator.
  const std::vector<StoredGenome> genomes = ReadGenomes(db_, 1);
  ASSERT_EQ(genomes.size(), 2u * 30u * 40u);
  std::map<int64_t, const StoredGenome*> by_id;
  for (const StoredGenome& g : genomes) by_id[g.id] = &g;
  int evaluated_here = 0;
  for (const StoredGenome& g : genomes) {
    SCOPED_TRACE(absl::StrCat("genome ", g.id, " island ", g.island, " gen ",
                              g.generation, " slot ", g.slot));
    EXPECT_EQ(g.eval_state, skerry::v1::EVALUATED);
    EXPECT_TRUE(g.has_score);
    if (g.attempts > 0) ++evaluated_here;
    for (int64_t parent : {g.parent_a, g.parent_b}) {
      if (parent == 0) continue;
      ASSERT_EQ(by_id.count(parent), 1u) << "parent " << parent << " missing";
      EXPECT_EQ(by_id[parent]->generation, g.generation - 1);
    }
    if (g.generation == 0 || g.origin == skerry::v1::IMMIGRANT) {
      EXPECT_EQ(g.parent_a, 0);
    } else {
      EXPECT_NE(g.parent_a, 0);
    }
  }
  EXPECT_EQ(static_cast<uint64_t>(evaluated_here), run.run().evaluations());

  // Random search with the same evaluation budget, uniform over the usual
  // domain [-5.12, 5.12]^10 (Jamil & Yang 2013).
  const BuiltinFunction* rastrigin = FindBuiltin("rastrigin");
  ASSERT_NE(rastrigin, nullptr);
  StreamKey key;
  key.run_seed = 424242;
  RandomStream rng(key);
  double random_best = 1e300;
  std::vector<double> x(10);
  for (int i = 0; i < evaluated_here; ++i) {
    for (double& v : x) v = rng.Uniform(-5.12, 5.12);
    random_best = std::min(random_best, rastrigin->fn(x));
  }
  ASSERT_TRUE(run.run().has_best());
  EXPECT_LT(run.run().best_score(), random_best)
      << "GA best " << run.run().best_score() << " vs random search "
      << random_best << " over " << evaluated_here << " evaluations";

  // The champion, as the CLI exports it.
  testing::CommandResult champion =
      RunCommand(Cli({"champion", "1", "--json"}));
  ASSERT_EQ(champion.exit_code, 0) << champion.output;
  EXPECT_THAT(champion.output, HasSubstr("\"genes\""));
  testing::CommandResult show = RunCommand(Cli({"show", "1"}));
  EXPECT_EQ(show.exit_code, 0) << show.output;
  EXPECT_THAT(show.output, HasSubstr("finished"));
}

TEST_F(WalkingSkeletonTest, SubmitReportsSyntaxErrorsWithFileLineAndColumn) {
  const std::string spec = dir_.File("broken.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      spec, "name: \"x\"\ngenome_length: 3\nga { population_size: }\n"));
  testing::CommandResult r = RunCommand(Cli({"submit", spec}));
  EXPECT_NE(r.exit_code, 0);
  EXPECT_THAT(r.output, HasSubstr(spec + ":3:"));
}

TEST_F(WalkingSkeletonTest, SubmitNamesABadFieldAndItsRange) {
  const std::string spec = dir_.File("bad-field.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      spec,
      "genome_length: 3\nevaluator { builtin { function: \"sphere\" } }\n"
      "ga { population_size: 1 }\n"));
  testing::CommandResult r = RunCommand(Cli({"submit", spec}));
  EXPECT_NE(r.exit_code, 0);
  EXPECT_THAT(r.output, HasSubstr("ga.population_size"));
  // Nothing was stored.
  EXPECT_EQ(testing::QueryText(db_, "SELECT count(*) FROM runs"), "0");
}

TEST_F(WalkingSkeletonTest, ServerRefusesABadSpecSentDirectly) {
  skerry::v1::SubmitRunRequest req;
  req.mutable_spec()->set_genome_length(0);
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::seconds(10));
  skerry::v1::SubmitRunResponse resp;
  grpc::Status s = stub_->SubmitRun(&ctx, req, &resp);
  EXPECT_EQ(s.error_code(), grpc::StatusCode::INVALID_ARGUMENT);
  EXPECT_THAT(s.error_message(), HasSubstr("genome_length"));
}

}  // namespace
}  // namespace skerry
