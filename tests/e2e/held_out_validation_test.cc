// Held-out validation end to end: the real coordinator on a loopback port with
// a SQLite file, real worker processes, and the skerry CLI. Every validation
// score the fleet stores is checked against the same cases computed here,
// without the coordinator or the worker.
#include <cmath>
#include <map>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/genes.h"
#include "common/pole.h"
#include "common/spec.h"
#include "common/validation.h"
#include "gmock/gmock.h"
#include "grpcpp/grpcpp.h"
#include "gtest/gtest.h"
#include "skerry/v1/runs.grpc.pb.h"
#include "skerry/v1/validation.grpc.pb.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"
#include "tests/support/specs.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;
using testing::RunCommand;

const std::string kCartPoleSpec = testing::CartPoleValidatedSpec(500, 4);

// Scores case c of genes x as sum(x) + length(c) + (seed mod 97): easy to
// recompute here from the stored genes and the run's cases.
constexpr char kCaseScript[] = R"(import json, sys
for line in sys.stdin:
    r = json.loads(line)
    name = r.get("case_name", r.get("caseName", ""))
    s = sum(r.get("genes", [])) + len(name) + int(r.get("seed", "0")) % 97
    print(json.dumps({"id": r["id"], "score": s}), flush=True)
)";

class ValidationE2eTest : public ::testing::Test {
 protected:
  void SetUp() override {
    db_ = dir_.File("skerry.db");
    StartCoordinator();
  }

  void StartCoordinator() {
    absl::StatusOr<testing::StartedCoordinator> c = testing::StartCoordinator(
        SKERRY_COORDINATOR_BIN, db_,
        dir_.File(absl::StrCat("coordinator", starts_++, ".log")));
    ASSERT_TRUE(c.ok()) << c.status();
    coordinator_ = std::make_unique<testing::StartedCoordinator>(std::move(*c));
    auto channel = grpc::CreateChannel(coordinator_->address(),
                                       grpc::InsecureChannelCredentials());
    runs_ = skerry::v1::RunService::NewStub(channel);
    validations_ = skerry::v1::ValidationService::NewStub(channel);
  }

  std::vector<std::string> Cli(std::vector<std::string> args) {
    std::vector<std::string> argv = {SKERRY_CLI_BIN, "--coordinator",
                                     coordinator_->address()};
    argv.insert(argv.end(), args.begin(), args.end());
    return argv;
  }

  void Submit(const std::string& text) {
    const std::string spec =
        dir_.File(absl::StrCat("run", ++runs_made_, ".spec"));
    ASSERT_TRUE(testing::WriteTextFile(spec, text));
    testing::CommandResult submit = RunCommand(Cli({"submit", spec}));
    ASSERT_EQ(submit.exit_code, 0) << submit.output;
  }

  void StartWorker() {
    absl::StatusOr<testing::Process> w = testing::Process::Start(
        {SKERRY_WORKER_BIN, "--coordinator", coordinator_->address(),
         "--threads", "2", "--name", absl::StrCat("w", workers_.size()),
         "--evaluator-dirs", dir_.path()},
        dir_.File(absl::StrCat("worker", workers_.size(), ".log")));
    ASSERT_TRUE(w.ok()) << w.status();
    workers_.push_back(std::move(*w));
  }

  skerry::v1::RunState State(uint64_t run) {
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() +
                     std::chrono::seconds(10));
    skerry::v1::RunRef ref;
    ref.set_run_id(run);
    skerry::v1::GetRunResponse resp;
    runs_->GetRun(&ctx, ref, &resp);
    return resp.run().state();
  }

  std::vector<skerry::v1::Validation> List(uint64_t run) {
    grpc::ClientContext ctx;
    ctx.set_deadline(std::chrono::system_clock::now() +
                     std::chrono::seconds(10));
    skerry::v1::ListValidationsRequest req;
    req.set_run_id(run);
    req.set_limit(10000);
    skerry::v1::ListValidationsResponse resp;
    validations_->ListValidations(&ctx, req, &resp);
    return {resp.validations().begin(), resp.validations().end()};
  }

  // Waits for the run to finish and every validation of it to settle.
  std::vector<skerry::v1::Validation> Settled(uint64_t run) {
    std::vector<skerry::v1::Validation> list;
    const bool ok = testing::WaitFor(
        [&] {
          if (State(run) != skerry::v1::FINISHED) return false;
          list = List(run);
          for (const auto& v : list) {
            if (v.state() == skerry::v1::VALIDATION_PENDING) return false;
          }
          return !list.empty();
        },
        absl::Seconds(240));
    EXPECT_TRUE(ok) << "coordinator:\n"
                    << coordinator_->process.Log() << "\nworker 0:\n"
                    << (workers_.empty() ? "" : workers_[0].Log());
    return list;
  }

  std::map<int64_t, std::vector<double>> GenesById(uint64_t run) {
    std::map<int64_t, std::vector<double>> out;
    for (const testing::StoredGenome& g :
         testing::ReadGenomes(db_, static_cast<int64_t>(run))) {
      absl::StatusOr<std::vector<double>> genes = UnpackGenes(g.genes);
      EXPECT_TRUE(genes.ok());
      if (genes.ok()) out[g.id] = *genes;
    }
    return out;
  }

  testing::TempDir dir_;
  std::string db_;
  int starts_ = 0;
  int runs_made_ = 0;
  std::unique_ptr<testing::StartedCoordinator> coordinator_;
  std::unique_ptr<skerry::v1::RunService::Stub> runs_;
  std::unique_ptr<skerry::v1::ValidationService::Stub> validations_;
  std::vector<testing::Process> workers_;
};

v1::RunSpec Prepared(const std::string& text) {
  absl::StatusOr<v1::RunSpec> spec = ParseSpecText(text, "test.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<v1::RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

TEST_F(ValidationE2eTest, EveryGenerationsChampionIsValidatedByTheFleet) {
  Submit(kCartPoleSpec);
  StartWorker();
  const std::vector<skerry::v1::Validation> list = Settled(1);
  const v1::RunSpec spec = Prepared(kCartPoleSpec);
  std::map<int64_t, std::vector<double>> genes = GenesById(1);

  // One champion validation per island and generation, each the number of
  // the 625 generalisation starts the champion balances, as computed here.
  std::map<std::pair<uint32_t, uint32_t>, int> per_generation;
  for (const skerry::v1::Validation& v : list) {
    SCOPED_TRACE(v.DebugString());
    EXPECT_EQ(v.reason(), skerry::v1::GENERATION_CHAMPION);
    ASSERT_EQ(v.state(), skerry::v1::VALIDATION_DONE);
    EXPECT_EQ(v.cases(), pole::kGeneralisationStarts);
    EXPECT_EQ(v.training_state(), skerry::v1::EVALUATED);
    ++per_generation[{v.key().island(), v.key().generation()}];
    absl::StatusOr<uint32_t> balanced = pole::GeneralisationTest(
        spec.evaluator(), genes[static_cast<int64_t>(v.genome_id())]);
    ASSERT_TRUE(balanced.ok()) << balanced.status();
    EXPECT_EQ(v.score(), static_cast<double>(*balanced));
  }
  EXPECT_EQ(per_generation.size(), 2u * 4u);
  for (const auto& [key, n] : per_generation) EXPECT_EQ(n, 1);

  // The CLI shows validation beside training.
  testing::CommandResult show = RunCommand(Cli({"show", "1"}));
  EXPECT_EQ(show.exit_code, 0) << show.output;
  EXPECT_THAT(show.output, HasSubstr("validation  score "));
  EXPECT_THAT(show.output, HasSubstr("held-out cases"));
  EXPECT_THAT(show.output, HasSubstr("VALIDATION"));
  testing::CommandResult history = RunCommand(Cli({"history", "1"}));
  EXPECT_EQ(history.exit_code, 0) << history.output;
  EXPECT_THAT(history.output, HasSubstr("VALIDATION"));

  // Any genome on demand, named by its natural key.
  testing::CommandResult validate = RunCommand(
      Cli({"validate", "1/1/2/5", "--timeout", "120"}), absl::Seconds(150));
  ASSERT_EQ(validate.exit_code, 0) << validate.output;
  EXPECT_THAT(validate.output, HasSubstr("training:"));
  EXPECT_THAT(validate.output, HasSubstr("(1/1/2/5)"));
  std::vector<skerry::v1::Validation> after = List(1);
  ASSERT_EQ(after.size(), list.size() + 1);
  const skerry::v1::Validation& asked = after.front();  // newest first
  EXPECT_EQ(asked.reason(), skerry::v1::REQUESTED);
  EXPECT_EQ(asked.state(), skerry::v1::VALIDATION_DONE);
  absl::StatusOr<uint32_t> balanced = pole::GeneralisationTest(
      spec.evaluator(), genes[static_cast<int64_t>(asked.genome_id())]);
  ASSERT_TRUE(balanced.ok());
  EXPECT_EQ(asked.score(), static_cast<double>(*balanced));
  EXPECT_THAT(validate.output,
              HasSubstr(absl::StrCat("score ", *balanced, " on 625")));
  testing::CommandResult listed = RunCommand(Cli({"validations", "1"}));
  EXPECT_EQ(listed.exit_code, 0) << listed.output;
  EXPECT_THAT(listed.output, HasSubstr("requested"));
  EXPECT_THAT(listed.output, HasSubstr("champion"));

  // A one-run backup carries the validations, and --check accepts them.
  const std::string copy = dir_.File("run1-copy.db");
  testing::CommandResult backup =
      RunCommand(Cli({"backup", "1", "--to", copy}));
  ASSERT_EQ(backup.exit_code, 0) << backup.output;
  EXPECT_EQ(testing::QueryText(copy, "SELECT count(*) FROM validations"),
            absl::StrCat(after.size()));
  testing::CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", copy});
  EXPECT_EQ(check.exit_code, 0) << check.output;
  testing::CommandResult damage =
      RunCommand({"/usr/bin/sqlite3", copy,
                  "UPDATE validations SET genome_id = 999999 WHERE id = 1"});
  ASSERT_EQ(damage.exit_code, 0) << damage.output;
  check = RunCommand({SKERRY_COORDINATOR_BIN, "--check", copy});
  EXPECT_NE(check.exit_code, 0) << check.output;
  EXPECT_THAT(check.output, HasSubstr("validation names a genome"));
}

TEST_F(ValidationE2eTest, ExternalCasesAreScoredByTheUsersProgram) {
  const std::string script = dir_.File("cases.py");
  ASSERT_TRUE(testing::WriteTextFile(script, kCaseScript));
  const std::string text = absl::StrCat(
      "name: \"cases\" seed: 31 genome_length: 3 lower_bound: -1 "
      "upper_bound: 1 evaluator { external { argv: \"python3\" argv: \"",
      script,
      "\" } validation { cases: \"a\" cases: \"bbb\" seeds: 500 "
      "aggregate: AGGREGATE_MIN champions: NEW_BEST } } "
      "ga { population_size: 8 } stop { max_generations: 3 }");
  Submit(text);
  StartWorker();
  const std::vector<skerry::v1::Validation> list = Settled(1);
  const v1::RunSpec spec = Prepared(text);
  const std::vector<ValidationCase> cases =
      ValidationCases(spec.evaluator(), spec.seed());
  ASSERT_EQ(cases.size(), 3u);
  std::map<int64_t, std::vector<double>> genes = GenesById(1);
  ASSERT_FALSE(list.empty());
  for (const skerry::v1::Validation& v : list) {
    SCOPED_TRACE(v.DebugString());
    ASSERT_EQ(v.state(), skerry::v1::VALIDATION_DONE);
    EXPECT_EQ(v.cases(), 3u);
    double sum = 0;
    for (double g : genes[static_cast<int64_t>(v.genome_id())]) sum += g;
    double want = 1e300;
    for (const ValidationCase& c : cases) {
      want = std::min(want, sum + static_cast<double>(c.name.size()) +
                                static_cast<double>(c.seed % 97));
    }
    EXPECT_NEAR(v.score(), want, 1e-9);
  }
}

TEST_F(ValidationE2eTest, APendingValidationSurvivesACoordinatorKill) {
  std::string text = kCartPoleSpec;
  const std::string all = "validation { generalisation: true }";
  text.replace(text.find(all), all.size(),
               "validation { generalisation: true champions: ON_REQUEST }");
  Submit(text);
  // No worker yet: the request stays pending.
  testing::CommandResult asked =
      RunCommand(Cli({"validate", "1/0/0/3", "--no-wait"}));
  ASSERT_EQ(asked.exit_code, 0) << asked.output;
  EXPECT_THAT(asked.output, HasSubstr("pending"));
  coordinator_->process.Kill();
  StartCoordinator();
  StartWorker();
  testing::CommandResult done = RunCommand(
      Cli({"validate", "1/0/0/3", "--timeout", "120"}), absl::Seconds(150));
  ASSERT_EQ(done.exit_code, 0) << done.output << "\ncoordinator:\n"
                               << coordinator_->process.Log();
  EXPECT_THAT(done.output, HasSubstr("held-out cases"));
  const std::vector<skerry::v1::Validation> list = Settled(1);
  ASSERT_EQ(list.size(), 1u) << "ON_REQUEST: no champion validations";
  EXPECT_EQ(list[0].requested_unix_ms() > 0, true);
}

TEST_F(ValidationE2eTest, BadRequestsSayWhatIsWrong) {
  Submit(
      "name: \"plain\" genome_length: 2 evaluator { builtin { function: "
      "\"sphere\" } } stop { max_generations: 2 }");
  testing::CommandResult none = RunCommand(Cli({"validate", "1/best"}));
  EXPECT_EQ(none.exit_code, 1) << none.output;
  EXPECT_THAT(none.output, HasSubstr("has no champion yet"));
  none = RunCommand(Cli({"validate", "1"}));
  EXPECT_EQ(none.exit_code, 1) << none.output;
  EXPECT_THAT(none.output, HasSubstr("declares no validation cases"));
  testing::CommandResult missing = RunCommand(Cli({"validate", "4242"}));
  EXPECT_EQ(missing.exit_code, 1) << missing.output;
  EXPECT_THAT(missing.output, HasSubstr("genome 4242 not found"));
  testing::CommandResult usage = RunCommand(Cli({"validate", "1/2"}));
  EXPECT_EQ(usage.exit_code, 2) << usage.output;
  testing::CommandResult timeout =
      RunCommand(Cli({"validate", "1", "--timeout", "0"}));
  EXPECT_EQ(timeout.exit_code, 2) << timeout.output;
  const std::string bad = dir_.File("bad.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      bad,
      "genome_length: 2 evaluator { builtin { function: \"sphere\" } "
      "validation { cases: \"x\" } }"));
  testing::CommandResult submit = RunCommand(Cli({"submit", bad}));
  EXPECT_EQ(submit.exit_code, 2) << submit.output;
  EXPECT_THAT(submit.output, HasSubstr("evaluator.validation"));
  EXPECT_EQ(List(1).size(), 0u);
}

}  // namespace
}  // namespace skerry
