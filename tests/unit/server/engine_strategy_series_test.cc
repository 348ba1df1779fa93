// Seed series and run extension (engine_series.cc) with the search strategies
// of strategy.h: every run of a series is seeded by its islands' strategies
// and stores their states with generation 0, so a CMA-ES series runs and
// passes `--check`; an ended run of every strategy, extended, makes the
// genomes a run given the raised rule from the start makes, also when an
// island's stored state was of a generation trimmed at the finish (rebuilt
// by replay, strategy_replay.h).
#include <functional>
#include <map>
#include <memory>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
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
    DriveWith([](const store::GenomeRecord& g) {
      double f = 0.0;
      for (double x : g.genes) f += x * x;
      return f;
    });
  }

  // Evaluates every task with `score` until no run is active; while `hold`
  // says so of a genome, its task is kept leased and not reported (the
  // worker is slow), so its island falls behind. Held tasks are reported
  // once nothing else is left. Bounded.
  void DriveWith(
      const std::function<double(const store::GenomeRecord&)>& score,
      const std::function<bool(const store::GenomeRecord&)>& hold = nullptr) {
    std::vector<skerry::v1::Task> held;
    for (int round = 0; round < 400; ++round) {
      std::vector<skerry::v1::Task> tasks =
          queue_->Lease(1, 1000, absl::ZeroDuration());
      if (tasks.empty() && held.empty()) return;
      if (tasks.empty()) tasks = std::exchange(held, {});
      std::vector<skerry::v1::TaskResult> results;
      for (const skerry::v1::Task& t : tasks) {
        absl::StatusOr<store::GenomeRecord> g =
            store_->genomes().GetGenome(static_cast<int64_t>(t.task_id()));
        ASSERT_TRUE(g.ok()) << g.status();
        if (hold != nullptr && hold(*g)) {
          held.push_back(t);
          continue;
        }
        skerry::v1::TaskResult& r = results.emplace_back();
        r.set_task_id(t.task_id());
        r.set_attempt(t.attempt());
        r.set_score(score(*g));
      }
      ASSERT_TRUE(engine_->Report(1, results).ok());
      ASSERT_TRUE(engine_->ListSummaries().ok());  // waits for the breeding
    }
    ADD_FAILURE() << "runs did not end in 400 rounds";
  }

  // Every genome of the run by island, generation and slot: what it is,
  // where it came from (parents by their own island, generation and slot)
  // and what it scored. Ids differ between runs and are left out.
  std::vector<std::string> Genomes(int64_t run_id) {
    std::vector<std::string> out;
    absl::StatusOr<std::vector<store::IslandRecord>> islands =
        store_->runs().GetIslands(run_id);
    EXPECT_TRUE(islands.ok()) << islands.status();
    if (!islands.ok()) return out;
    std::vector<store::GenomeRecord> all;
    for (const store::IslandRecord& ir : *islands) {
      for (uint32_t g = 0; g <= ir.generation; ++g) {
        absl::StatusOr<std::vector<store::GenomeRecord>> gen =
            store_->genomes().GetGeneration(run_id, ir.index, g);
        EXPECT_TRUE(gen.ok()) << gen.status();
        if (!gen.ok()) return out;
        all.insert(all.end(), gen->begin(), gen->end());
      }
    }
    std::map<int64_t, std::string> where;  // genome id -> island/gen/slot
    for (const store::GenomeRecord& r : all) {
      where[r.id] = absl::StrCat(r.island, "/", r.generation, "/", r.slot);
    }
    for (const store::GenomeRecord& r : all) {
      std::string parents;
      for (int64_t p : {r.parent_a, r.parent_b}) {
        auto it = where.find(p);
        absl::StrAppend(&parents, " ",
                        p == 0              ? "none"
                        : it == where.end() ? "?"
                                            : it->second);
      }
      out.push_back(absl::StrCat(
          where[r.id], " origin ", r.origin, " parents", parents, " genes ",
          absl::StrJoin(r.genes, ","), " score ", r.score, " state ", r.state));
    }
    return out;
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
        store_->runs().GetStrategyStates(run.id);
    ASSERT_TRUE(states.ok()) << states.status();
    ASSERT_EQ(states->size(), 1u);
    skerry::v1::StrategyState state;
    ASSERT_TRUE(state.ParseFromString(states->at(0)));
    EXPECT_TRUE(state.has_cma_es()) << "run " << run.id;
  }
  DriveAll();
  for (const store::RunRecord& run : *runs) {
    absl::StatusOr<store::RunRecord> done = store_->runs().GetRun(run.id);
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
    absl::StatusOr<store::RunRecord> done = store_->runs().GetRun(run.id);
    ASSERT_TRUE(done.ok());
    EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
    absl::StatusOr<std::map<uint32_t, std::string>> states =
        store_->runs().GetStrategyStates(run.id);
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
  absl::StatusOr<store::RunRecord> done = store_->runs().GetRun(run->id);
  ASSERT_TRUE(done.ok());
  EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

// An ended run of each strategy, extended to more generations, goes on as a
// run given the larger limit from the start: the same genomes, parent links
// and scores, generation by generation (invariant 4: genomes are a pure
// function of spec and seed). Two islands migrating every generation, so
// the states the extension goes on from include what migrants did.
class ExtendEveryStrategyTest
    : public EngineStrategySeriesTest,
      public ::testing::WithParamInterface<const char*> {};

TEST_P(ExtendEveryStrategyTest, ExtendedRunEqualsTheLongerRunFromTheStart) {
  const std::string strategy =
      absl::StrCat(GetParam(), " islands { count: 2 interval: 1 migrants: 1 }");
  RunSpec short_spec = Spec(strategy);
  RunSpec long_spec = short_spec;
  long_spec.mutable_stop()->set_max_generations(6);
  absl::StatusOr<store::RunRecord> extended =
      engine_->Submit(short_spec, "text", "local");
  ASSERT_TRUE(extended.ok()) << extended.status();
  DriveAll();
  skerry::v1::StopSpec more;
  more.set_max_generations(6);
  absl::Status s = engine_->Extend(extended->id, more);
  ASSERT_TRUE(s.ok()) << s;
  DriveAll();
  absl::StatusOr<store::RunRecord> whole =
      engine_->Submit(long_spec, "text", "local");
  ASSERT_TRUE(whole.ok()) << whole.status();
  DriveAll();

  for (int64_t id : {extended->id, whole->id}) {
    absl::StatusOr<store::RunRecord> done = store_->runs().GetRun(id);
    ASSERT_TRUE(done.ok());
    EXPECT_EQ(done->state, skerry::v1::FINISHED) << done->message;
  }
  const std::vector<std::string> a = Genomes(extended->id);
  const std::vector<std::string> b = Genomes(whole->id);
  EXPECT_GT(a.size(), 2 * 3 * 4u);  // two islands, generations 0..5
  EXPECT_EQ(a, b);
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

std::string StrategyName(const ::testing::TestParamInfo<const char*>& info) {
  static const char* const kNames[] = {"ga", "cma_es", "sep_cma_es",
                                       "ipop_cma_es", "natural_es"};
  return kNames[info.index];
}

INSTANTIATE_TEST_SUITE_P(
    Strategies, ExtendEveryStrategyTest,
    ::testing::Values("ga { population_size: 6 }", "strategy { cma_es { } }",
                      "strategy { sep_cma_es { } }",
                      "strategy { cma_es { population_size: 4 ipop { } } }",
                      "strategy { natural_es { population_size: 6 } }"),
    StrategyName);

// A run ended by its target score while one island had bred past the stop
// generation: the finish trims that island back, and its stored state is of
// the trimmed generation. Extended, the island goes on from the state that
// produced the generation it is at, rebuilt by replay, and the run equals
// one that never had the target. The scores are a function of where a
// genome stands (island 0's generation 2 scores 0, every other genome 1 plus
// the sphere), so both runs see the same ones.
TEST_F(EngineStrategySeriesTest, IslandTrimmedAtTheFinishGoesOnFromItsState) {
  const std::string strategy =
      "strategy { cma_es { } } islands { count: 2 interval: 50 }";
  RunSpec targeted = Spec(strategy);
  targeted.mutable_stop()->set_max_generations(7);
  targeted.mutable_stop()->set_target_score(0.5);
  RunSpec whole_spec = targeted;
  whole_spec.mutable_stop()->set_target_score(-1.0);
  auto score = [](const store::GenomeRecord& g) {
    if (g.island == 0 && g.generation == 2) return 0.0;
    double f = 1.0;
    for (double x : g.genes) f += x * x;
    return f;
  };
  absl::StatusOr<store::RunRecord> run =
      engine_->Submit(targeted, "text", "local");
  ASSERT_TRUE(run.ok()) << run.status();
  // Island 0's first generation waits until island 1 has bred generation 4.
  DriveWith(score, [&](const store::GenomeRecord& g) {
    if (g.island != 0) return false;
    absl::StatusOr<std::vector<store::IslandRecord>> islands =
        store_->runs().GetIslands(run->id);
    return islands.ok() && islands->size() == 2 && (*islands)[1].generation < 4;
  });
  absl::StatusOr<store::RunRecord> ended = store_->runs().GetRun(run->id);
  ASSERT_TRUE(ended.ok());
  ASSERT_EQ(ended->state, skerry::v1::FINISHED) << ended->message;
  absl::StatusOr<std::vector<store::IslandRecord>> islands =
      store_->runs().GetIslands(run->id);
  ASSERT_TRUE(islands.ok());
  ASSERT_EQ((*islands)[1].generation, 2u);  // trimmed back from 4
  absl::StatusOr<std::map<uint32_t, std::string>> states =
      store_->runs().GetStrategyStates(run->id);
  ASSERT_TRUE(states.ok());
  skerry::v1::StrategyState stale;
  ASSERT_TRUE(stale.ParseFromString(states->at(1)));
  // Of a generation no longer stored (island 1 bred on while it waited).
  EXPECT_GT(stale.generation(), 2u);

  skerry::v1::StopSpec lower;
  lower.set_target_score(-1.0);
  absl::Status s = engine_->Extend(run->id, lower);
  ASSERT_TRUE(s.ok()) << s;
  DriveWith(score);
  absl::StatusOr<store::RunRecord> whole =
      engine_->Submit(whole_spec, "text", "local");
  ASSERT_TRUE(whole.ok()) << whole.status();
  DriveWith(score);
  EXPECT_EQ(Genomes(run->id), Genomes(whole->id));
  absl::StatusOr<store::CheckReport> report =
      store::CheckDatabase(dir_.File("skerry.db"));
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

// Asynchronous islands cannot be replayed: an ended run whose trimmed
// island would need it is refused, naming the field, and stays as it was.
TEST_F(EngineStrategySeriesTest, TrimmedAsynchronousIslandIsNotExtended) {
  RunSpec spec = Spec(
      "strategy { cma_es { } } islands { count: 2 interval: 50 asynchronous: "
      "true }");
  spec.mutable_stop()->set_max_generations(7);
  spec.mutable_stop()->set_target_score(0.5);
  absl::StatusOr<store::RunRecord> run = engine_->Submit(spec, "text", "local");
  ASSERT_TRUE(run.ok()) << run.status();
  DriveWith(
      [](const store::GenomeRecord& g) {
        return g.island == 0 && g.generation == 2 ? 0.0 : 1.0;
      },
      [&](const store::GenomeRecord& g) {
        if (g.island != 0) return false;
        absl::StatusOr<std::vector<store::IslandRecord>> islands =
            store_->runs().GetIslands(run->id);
        return islands.ok() && islands->size() == 2 &&
               (*islands)[1].generation < 4;
      });
  absl::StatusOr<store::RunRecord> ended = store_->runs().GetRun(run->id);
  ASSERT_TRUE(ended.ok());
  ASSERT_EQ(ended->state, skerry::v1::FINISHED) << ended->message;
  skerry::v1::StopSpec lower;
  lower.set_target_score(-1.0);
  absl::Status s = engine_->Extend(run->id, lower);
  EXPECT_TRUE(absl::IsFailedPrecondition(s)) << s;
  EXPECT_THAT(std::string(s.message()), HasSubstr("islands.asynchronous"));
  absl::StatusOr<store::RunRecord> after = store_->runs().GetRun(run->id);
  ASSERT_TRUE(after.ok());
  EXPECT_EQ(after->state, skerry::v1::FINISHED);
  EXPECT_EQ(after->spec.stop().target_score(), 0.5);
}

}  // namespace
}  // namespace skerry::engine
