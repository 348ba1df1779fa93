// Seed series and run extension (engine_series.cc) with the search strategies
// of strategy.h: every run of a series is seeded by its islands' strategies
// and stores their states with generation 0, so a CMA-ES series runs and
// passes `--check`; an ended CMA-ES run is not extended (its stored
// distribution may be of a trimmed generation), a GA run is.
#include <memory>
#include <string>
#include <vector>

#include "common/clock.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/scheduler/task_queue.h"
#include "server/store/check.h"
#include "server/store/store.h"
#include "skerry/v1/strategy.pb.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::testing::TempDir;
using skerry::v1::RunSpec;
using ::testing::HasSubstr;

RunSpec Spec(const std::string& strategy) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(
      "name: \"series\" seed: 1 genome_length: 3 evaluator { builtin { "
      "function: \"sphere\" } } stop { max_generations: 3 } " +
          strategy,
      "series.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  return spec.ok() ? *spec : RunSpec();
}

class EngineStrategySeriesTest : public ::testing::Test {
 protected:
  void SetUp() override {
    auto store = store::Store::Open(dir_.File("skerry.db"));
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = std::move(*store);
    queue_ = std::make_unique<scheduler::TaskQueue>(&clock_, absl::Seconds(30));
    auto engine = Engine::Open(store_.get(), queue_.get(), &clock_);
    ASSERT_TRUE(engine.ok()) << engine.status();
    engine_ = std::move(*engine);
  }
  void TearDown() override {
    engine_.reset();
    queue_.reset();
    store_.reset();
  }

  // Evaluates every task (the sphere) until no run is active. Bounded.
  void DriveAll() {
    for (int round = 0; round < 200; ++round) {
      std::vector<skerry::v1::Task> tasks =
          queue_->Lease(1, 1000, absl::ZeroDuration());
      if (tasks.empty()) return;
      std::vector<skerry::v1::TaskResult> results;
      for (const skerry::v1::Task& t : tasks) {
        double f = 0.0;
        for (double x : t.genes()) f += x * x;
        skerry::v1::TaskResult& r = results.emplace_back();
        r.set_task_id(t.task_id());
        r.set_attempt(t.attempt());
        r.set_score(f);
      }
      ASSERT_TRUE(engine_->Report(1, results).ok());
      ASSERT_TRUE(engine_->ListSummaries().ok());  // waits for the breeding
    }
    ADD_FAILURE() << "runs did not end in 200 rounds";
  }

  FakeClock clock_;
  TempDir dir_;
  std::unique_ptr<store::Store> store_;
  std::unique_ptr<scheduler::TaskQueue> queue_;
  std::unique_ptr<Engine> engine_;
};

TEST_F(EngineStrategySeriesTest, CmaEsSeriesStoresEachRunsStatesAndFinishes) {
  store::SeriesRecord series;
  series.name = "cma";
  series.owner = "local";
  series.members = {{0, 11}, {0, 12}};
  absl::StatusOr<std::vector<store::RunRecord>> runs =
      engine_->SubmitSeries(Spec("strategy { cma_es { } }"), "text", &series);
  ASSERT_TRUE(runs.ok()) << runs.status();
  ASSERT_EQ(runs->size(), 2u);
  for (const store::RunRecord& run : *runs) {
    absl::StatusOr<std::map<uint32_t, std::string>> states =
        store_->GetStrategyStates(run.id);
    ASSERT_TRUE(states.ok()) << states.status();
    ASSERT_EQ(states->size(), 1u);
    skerry::v1::StrategyState state;
    ASSERT_TRUE(state.ParseFromString(states->at(0)));
    EXPECT_TRUE(state.has_cma_es()) << "run " << run.id;
  }
  DriveAll();
  for (const store::RunRecord& run : *runs) {
    absl::StatusOr<store::RunRecord> done = store_->GetRun(run.id);
    ASSERT_TRUE(done.ok());
    EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
  }
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

// A natural ES series of two-island runs with migration: each run is seeded
// with natural ES states, finishes, and its states (centre, moments, step
// count) pass `--check`; every island made one Adam step per generation told.
TEST_F(EngineStrategySeriesTest,
       NaturalEsSeriesWithIslandsFinishesAndPassesCheck) {
  store::SeriesRecord series;
  series.name = "natural-es";
  series.owner = "local";
  series.members = {{0, 21}, {0, 22}};
  absl::StatusOr<std::vector<store::RunRecord>> runs = engine_->SubmitSeries(
      Spec("strategy { natural_es { population_size: 6 } } islands { count: "
           "2 interval: 1 migrants: 1 }"),
      "text", &series);
  ASSERT_TRUE(runs.ok()) << runs.status();
  DriveAll();
  for (const store::RunRecord& run : *runs) {
    absl::StatusOr<store::RunRecord> done = store_->GetRun(run.id);
    ASSERT_TRUE(done.ok());
    EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
    absl::StatusOr<std::map<uint32_t, std::string>> states =
        store_->GetStrategyStates(run.id);
    ASSERT_TRUE(states.ok()) << states.status();
    ASSERT_EQ(states->size(), 2u);
    for (const auto& [island, bytes] : *states) {
      skerry::v1::StrategyState state;
      ASSERT_TRUE(state.ParseFromString(bytes));
      ASSERT_TRUE(state.has_natural_es()) << "run " << run.id;
      EXPECT_EQ(state.natural_es().centre_size(), 3);
      EXPECT_GE(state.natural_es().step(), 1u) << "island " << island;
    }
  }
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

TEST_F(EngineStrategySeriesTest, EndedCmaEsRunIsNotExtendedAndSaysWhy) {
  absl::StatusOr<store::RunRecord> run =
      engine_->Submit(Spec("strategy { cma_es { } }"), "text", "local");
  ASSERT_TRUE(run.ok()) << run.status();
  DriveAll();
  skerry::v1::StopSpec more;
  more.set_max_generations(5);
  absl::Status s = engine_->Extend(run->id, more);
  EXPECT_TRUE(absl::IsFailedPrecondition(s)) << s;
  EXPECT_THAT(std::string(s.message()), HasSubstr("strategy"));
  EXPECT_THAT(std::string(s.message()), HasSubstr("only GA runs"));
}

// A GA run extended goes on and ends with every state row sound.
TEST_F(EngineStrategySeriesTest, ExtendedGaRunFinishesAndPassesCheck) {
  absl::StatusOr<store::RunRecord> run =
      engine_->Submit(Spec("ga { population_size: 6 }"), "text", "local");
  ASSERT_TRUE(run.ok()) << run.status();
  DriveAll();
  skerry::v1::StopSpec more;
  more.set_max_generations(5);
  ASSERT_TRUE(engine_->Extend(run->id, more).ok());
  DriveAll();
  absl::StatusOr<store::RunRecord> done = store_->GetRun(run->id);
  ASSERT_TRUE(done.ok());
  EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

}  // namespace
}  // namespace skerry::engine
