// Tests for the SQLite store's commit points (server/store/store.h): what each
// writes, their atomicity, trimming and the champion tie rule. Opening, schema
// versions and pragmas: store_open_test.cc.
#include "server/store/store.h"

#include <sqlite3.h>

#include <algorithm>
#include <array>
#include <map>
#include <optional>
#include <set>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/support/process.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using skerry::testing::Message;
using skerry::testing::RawQuery;
using skerry::testing::TempDir;
using skerry::v1::RunSpec;
using ::testing::HasSubstr;

TEST_F(StoreTest, ReopenKeepsRuns) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  store_.reset();
  absl::StatusOr<std::unique_ptr<Store>> again = Store::Open(path());
  ASSERT_TRUE(again.ok()) << again.status();
  absl::StatusOr<RunRecord> got = (*again)->runs().GetRun(run.id);
  ASSERT_TRUE(got.ok()) << got.status();
  EXPECT_EQ(got->name, "store-test");
  EXPECT_EQ(got->owner, "alice");
  EXPECT_EQ(got->spec.SerializeAsString(), run.spec.SerializeAsString());
}

// ---- CreateRun ----

TEST_F(StoreTest, CreateRunWritesRunIslandsAndGenerationZero) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  EXPECT_GT(run.id, 0);

  std::set<int64_t> ids;
  for (const GenomeRecord& g : genomes) {
    EXPECT_GT(g.id, 0);
    EXPECT_EQ(g.run_id, run.id);
    ids.insert(g.id);
  }
  EXPECT_EQ(ids.size(), genomes.size()) << "genome ids must be distinct";

  absl::StatusOr<std::vector<IslandRecord>> islands =
      store_->runs().GetIslands(run.id);
  ASSERT_TRUE(islands.ok()) << islands.status();
  ASSERT_EQ(islands->size(), 2u);
  for (uint32_t i = 0; i < 2; ++i) {
    EXPECT_EQ((*islands)[i].index, i);
    EXPECT_EQ((*islands)[i].generation, 0u);
    EXPECT_FALSE((*islands)[i].done);
  }
  for (uint32_t i = 0; i < 2; ++i) {
    absl::StatusOr<std::vector<GenomeRecord>> gen =
        store_->genomes().GetGeneration(run.id, i, 0);
    ASSERT_TRUE(gen.ok()) << gen.status();
    ASSERT_EQ(gen->size(), 4u);
    for (uint32_t s = 0; s < 4; ++s) {
      const GenomeRecord& want = genomes[i * 4 + s];
      const GenomeRecord& got = (*gen)[s];
      EXPECT_EQ(got.id, want.id);
      EXPECT_EQ(got.slot, s);
      EXPECT_EQ(got.genes, want.genes);
      EXPECT_EQ(got.state, skerry::v1::PENDING);
      EXPECT_EQ(got.origin, skerry::v1::SEEDED);
      EXPECT_EQ(got.parent_a, 0);
      EXPECT_EQ(got.parent_b, 0);
    }
  }
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok()) << stored.status();
  EXPECT_EQ(stored->state, skerry::v1::RUNNING);
  EXPECT_EQ(stored->evaluations, 0);
  EXPECT_FALSE(stored->best_score.has_value());
  EXPECT_EQ(stored->champion_id, 0);
}

TEST_F(StoreTest, CreateRunWithDuplicateNaturalKeyWritesNothing) {
  RunRecord run = MakeRun(SmallSpec(1));
  std::vector<GenomeRecord> genomes = Generation0(1, 3);
  genomes.push_back(MakeGenome(0, 0, 1, 9.0));  // slot 1 twice
  absl::Status s = store_->runs().CreateRun(&run, &genomes);
  EXPECT_FALSE(s.ok());
  absl::StatusOr<std::vector<RunRecord>> runs = store_->runs().ListRuns();
  ASSERT_TRUE(runs.ok()) << runs.status();
  EXPECT_TRUE(runs->empty()) << "a failed CreateRun left a run behind";
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM genomes"), "0");
  EXPECT_EQ(RawQuery(path(), "SELECT count(*) FROM islands"), "0");
}

TEST_F(StoreTest, GetRunOfUnknownIdIsNotFoundNamingTheRun) {
  absl::StatusOr<RunRecord> run = store_->runs().GetRun(4242);
  ASSERT_FALSE(run.ok());
  EXPECT_EQ(run.status().code(), absl::StatusCode::kNotFound);
  EXPECT_THAT(run.status().message(), HasSubstr("4242"));
}

// ---- CommitResults ----

TEST_F(StoreTest, CommitResultsStoresScoresAndCountsEvaluations) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  std::vector<ResultUpdate> updates(2);
  updates[0].genome_id = genomes[0].id;
  updates[0].run_id = run.id;
  updates[0].state = skerry::v1::EVALUATED;
  updates[0].score = 2.5;
  updates[0].attempts = 1;
  updates[0].eval_seconds = 0.25;
  // A failed attempt that may be retried: the genome stays pending.
  updates[1].genome_id = genomes[1].id;
  updates[1].run_id = run.id;
  updates[1].state = skerry::v1::PENDING;
  updates[1].attempts = 1;
  updates[1].error = "simulator crashed";
  ASSERT_TRUE(store_->genomes().CommitResults(updates).ok());

  absl::StatusOr<GenomeRecord> g0 = store_->genomes().GetGenome(genomes[0].id);
  ASSERT_TRUE(g0.ok()) << g0.status();
  EXPECT_EQ(g0->state, skerry::v1::EVALUATED);
  EXPECT_EQ(g0->score, 2.5);
  EXPECT_EQ(g0->attempts, 1u);
  EXPECT_EQ(g0->eval_seconds, 0.25);
  absl::StatusOr<GenomeRecord> g1 = store_->genomes().GetGenome(genomes[1].id);
  ASSERT_TRUE(g1.ok()) << g1.status();
  EXPECT_EQ(g1->state, skerry::v1::PENDING);
  EXPECT_EQ(g1->attempts, 1u);
  EXPECT_EQ(g1->error, "simulator crashed");
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->evaluations, 1) << "only the final result counts";
}

TEST_F(StoreTest, CommitResultsStoresMetricsWithTheScore) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  std::vector<ResultUpdate> updates(1);
  updates[0].genome_id = genomes[0].id;
  updates[0].run_id = run.id;
  updates[0].state = skerry::v1::EVALUATED;
  updates[0].score = 1;
  updates[0].attempts = 1;
  updates[0].metrics = {{"max_temp_c", 22.5}, {"vent_travel", 1.75}};
  ASSERT_TRUE(store_->genomes().CommitResults(updates).ok());
  absl::StatusOr<std::map<std::string, double>> m =
      store_->genomes().GetGenomeMetrics(genomes[0].id);
  ASSERT_TRUE(m.ok()) << m.status();
  EXPECT_EQ(*m, updates[0].metrics);
  EXPECT_TRUE(store_->genomes().GetGenomeMetrics(genomes[1].id)->empty());
  auto means = store_->genomes().MetricMeans(run.id);
  ASSERT_TRUE(means.ok());
  const std::pair<uint32_t, uint32_t> key(genomes[0].island,
                                          genomes[0].generation);
  EXPECT_EQ((*means)[key].at("vent_travel"), 1.75);
}

TEST_F(StoreTest, CommitResultsRefusesBatchWithNonPendingGenomeAndAppliesNone) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate({genomes[2]}, {7.0});

  std::vector<ResultUpdate> batch(3);
  for (int i = 0; i < 3; ++i) {
    batch[i].genome_id = genomes[i].id;
    batch[i].run_id = run.id;
    batch[i].state = skerry::v1::EVALUATED;
    batch[i].score = 100.0 + i;
    batch[i].attempts = 1;
  }
  absl::Status s = store_->genomes().CommitResults(batch);
  ASSERT_FALSE(s.ok());
  EXPECT_EQ(s.code(), absl::StatusCode::kFailedPrecondition) << s;
  EXPECT_THAT(Message(s), HasSubstr(absl::StrCat("genome ", genomes[2].id)));

  for (int i = 0; i < 2; ++i) {
    absl::StatusOr<GenomeRecord> g = store_->genomes().GetGenome(genomes[i].id);
    ASSERT_TRUE(g.ok());
    EXPECT_EQ(g->state, skerry::v1::PENDING) << "genome " << i;
    EXPECT_EQ(g->attempts, 0u);
  }
  absl::StatusOr<GenomeRecord> g2 = store_->genomes().GetGenome(genomes[2].id);
  ASSERT_TRUE(g2.ok());
  EXPECT_EQ(g2->score, 7.0);
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->evaluations, 1);
  // The store is still usable after the rollback.
  EXPECT_TRUE(store_->genomes().CommitResults({batch[0]}).ok());
}

TEST_F(StoreTest, CommitResultsForUnknownGenomeIsRefused) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  ResultUpdate u;
  u.genome_id = 987654;
  u.run_id = run.id;
  u.score = 1.0;
  absl::Status s = store_->genomes().CommitResults({u});
  EXPECT_EQ(s.code(), absl::StatusCode::kFailedPrecondition) << s;
}

// ---- CommitGeneration ----

TEST_F(StoreTest, CommitGenerationWritesGenomesIslandStatsAndChampionTogether) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  std::vector<GenomeRecord> island0(genomes.begin(), genomes.begin() + 4);
  Evaluate(island0, {4.0, 3.0, 2.0, 1.0});

  std::vector<GenomeRecord> next;
  for (uint32_t s = 0; s < 4; ++s) {
    GenomeRecord g = MakeGenome(0, 1, s, 10.0 + s);
    g.run_id = run.id;
    g.parent_a = island0[3].id;
    g.parent_b = s == 2 ? island0[2].id : 0;
    if (s == 0) {  // an elite keeps its score
      g.origin = skerry::v1::ELITE;
      g.state = skerry::v1::EVALUATED;
      g.score = 1.0;
      g.genes = island0[3].genes;
    }
    next.push_back(g);
  }
  GenerationCommit c;
  c.run_id = run.id;
  c.island = 0;
  c.completed.run_id = run.id;
  c.completed.island = 0;
  c.completed.generation = 0;
  c.completed.best = 1.0;
  c.completed.mean = 2.5;
  c.completed.worst = 4.0;
  c.completed.diversity = 0.75;
  c.completed.evaluations = 4;
  c.next = &next;
  c.champion = std::make_pair(island0[3].id, 1.0);
  ASSERT_TRUE(store_->runs().CommitGeneration(c).ok());

  for (const GenomeRecord& g : next) EXPECT_GT(g.id, 0) << "ids filled in";
  absl::StatusOr<std::vector<IslandRecord>> islands =
      store_->runs().GetIslands(run.id);
  ASSERT_TRUE(islands.ok());
  EXPECT_EQ((*islands)[0].generation, 1u);
  EXPECT_EQ((*islands)[1].generation, 0u) << "other islands untouched";

  absl::StatusOr<std::vector<GenomeRecord>> gen1 =
      store_->genomes().GetGeneration(run.id, 0, 1);
  ASSERT_TRUE(gen1.ok());
  ASSERT_EQ(gen1->size(), 4u);
  EXPECT_EQ((*gen1)[0].origin, skerry::v1::ELITE);
  EXPECT_EQ((*gen1)[0].state, skerry::v1::EVALUATED);
  EXPECT_EQ((*gen1)[0].score, 1.0);
  EXPECT_EQ((*gen1)[2].parent_a, island0[3].id);
  EXPECT_EQ((*gen1)[2].parent_b, island0[2].id);
  EXPECT_EQ((*gen1)[1].parent_b, 0);
  EXPECT_EQ((*gen1)[3].state, skerry::v1::PENDING);

  absl::StatusOr<std::vector<StatsRecord>> stats =
      store_->runs().GetStats(run.id, std::nullopt);
  ASSERT_TRUE(stats.ok());
  ASSERT_EQ(stats->size(), 1u);
  EXPECT_EQ((*stats)[0].generation, 0u);
  EXPECT_EQ((*stats)[0].best, 1.0);
  EXPECT_EQ((*stats)[0].mean, 2.5);
  EXPECT_EQ((*stats)[0].worst, 4.0);
  EXPECT_EQ((*stats)[0].diversity, 0.75);
  EXPECT_EQ((*stats)[0].evaluations, 4u);

  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->champion_id, island0[3].id);
  ASSERT_TRUE(stored->best_score.has_value());
  EXPECT_EQ(*stored->best_score, 1.0);
}

TEST_F(StoreTest, FailedCommitGenerationChangesNothing) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  std::vector<GenomeRecord> next;
  for (uint32_t s : {0u, 1u, 1u}) {  // slot 1 twice breaks the natural key
    GenomeRecord g = MakeGenome(0, 1, s, 1.0);
    g.run_id = run.id;
    next.push_back(g);
  }
  GenerationCommit c;
  c.run_id = run.id;
  c.island = 0;
  c.completed.run_id = run.id;
  c.completed.generation = 0;
  c.next = &next;
  c.champion = std::make_pair(genomes[3].id, 1.0);
  c.stop_generation = 0;
  EXPECT_FALSE(store_->runs().CommitGeneration(c).ok());

  absl::StatusOr<std::vector<IslandRecord>> islands =
      store_->runs().GetIslands(run.id);
  ASSERT_TRUE(islands.ok());
  EXPECT_EQ((*islands)[0].generation, 0u);
  absl::StatusOr<std::vector<StatsRecord>> stats =
      store_->runs().GetStats(run.id, std::nullopt);
  ASSERT_TRUE(stats.ok());
  EXPECT_TRUE(stats->empty());
  absl::StatusOr<std::vector<GenomeRecord>> gen1 =
      store_->genomes().GetGeneration(run.id, 0, 1);
  ASSERT_TRUE(gen1.ok());
  EXPECT_TRUE(gen1->empty());
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->champion_id, 0);
  EXPECT_FALSE(stored->best_score.has_value());
  EXPECT_FALSE(stored->stop_generation.has_value());
}

TEST_F(StoreTest,
       CommitGenerationMarksIslandDoneAndKeepsSmallestStopGeneration) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  for (uint32_t stop : {3u, 1u, 2u}) {
    GenerationCommit c;
    c.run_id = run.id;
    c.island = 1;
    c.completed.run_id = run.id;
    c.completed.island = 1;
    c.completed.generation = 0;  // replaced each time (same key)
    c.island_done = true;
    c.stop_generation = stop;
    ASSERT_TRUE(store_->runs().CommitGeneration(c).ok());
  }
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  ASSERT_TRUE(stored->stop_generation.has_value());
  EXPECT_EQ(*stored->stop_generation, 1u);
  absl::StatusOr<std::vector<IslandRecord>> islands =
      store_->runs().GetIslands(run.id);
  ASSERT_TRUE(islands.ok());
  EXPECT_FALSE((*islands)[0].done);
  EXPECT_TRUE((*islands)[1].done);
  EXPECT_EQ((*islands)[1].generation, 0u);
}

// ---- FinishRun and the champion ----

// Builds, for one island, generations 1..last on top of the seeded generation,
// with the given scores per generation (index = generation).
class FinishRunTest : public StoreTest {
 protected:
  // Commits generation `g` + 1 of `island` (4 genomes, pending) after
  // evaluating generation g with `scores`; returns the new genomes.
  std::vector<GenomeRecord> Step(const RunRecord& run, uint32_t island,
                                 const std::vector<GenomeRecord>& current,
                                 const std::vector<double>& scores) {
    Evaluate(current, scores);
    std::vector<GenomeRecord> next;
    const uint32_t g = current.front().generation;
    for (uint32_t s = 0; s < 4; ++s) {
      GenomeRecord n = MakeGenome(island, g + 1, s, 1.0 + s);
      n.run_id = run.id;
      n.parent_a = current[s].id;
      next.push_back(n);
    }
    GenerationCommit c;
    c.run_id = run.id;
    c.island = island;
    c.completed.run_id = run.id;
    c.completed.island = island;
    c.completed.generation = g;
    c.next = &next;
    EXPECT_TRUE(store_->runs().CommitGeneration(c).ok());
    return next;
  }
};

// Observed: a run ended by its target trimmed the generations a faster
// island had bred past the stop generation, the next generation stored took
// the trimmed genomes' ids, and a worker's late result for a trimmed task
// (the same task id, attempt and worker, so the same lease proof) was stored
// as the new genome's score. Ids of trimmed and deleted rows are never given
// again (id_floors, schema version 13), nor is a deleted run's id.
TEST_F(FinishRunTest, TrimmedAndDeletedIdsAreNeverGivenAgain) {
  std::vector<GenomeRecord> genomes;
  const RunRecord first = CreateRun(1, &genomes);
  std::vector<GenomeRecord> g1 = Step(first, 0, genomes, {9, 9, 9, 9});
  int64_t largest = 0;
  for (const GenomeRecord& g : g1) largest = std::max(largest, g.id);
  ASSERT_TRUE(store_->runs()
                  .FinishRun(first.id, skerry::v1::FINISHED, "target reached",
                             /*keep_through=*/0, 5000)
                  .ok());
  ASSERT_EQ(RawQuery(path(), "SELECT max(id) FROM genomes"),
            std::to_string(largest - 4));  // generation 1 trimmed
  std::vector<GenomeRecord> more;
  const RunRecord second = CreateRun(1, &more);
  for (const GenomeRecord& g : more) {
    EXPECT_GT(g.id, largest) << "slot " << g.slot << " took a trimmed id";
  }
  // Deleting the newest run leaves its ids taken too.
  ASSERT_TRUE(store_->runs()
                  .FinishRun(second.id, skerry::v1::STOPPED, "stopped",
                             std::nullopt, 6000)
                  .ok());
  int64_t newest = 0;
  for (const GenomeRecord& g : more) newest = std::max(newest, g.id);
  ASSERT_TRUE(store_->runs().DeleteRun(second.id).ok());
  std::vector<GenomeRecord> third_genomes;
  const RunRecord third = CreateRun(1, &third_genomes);
  EXPECT_GT(third.id, second.id);
  for (const GenomeRecord& g : third_genomes) EXPECT_GT(g.id, newest);
}

// A run deleted before schema version 13 left no floor; its id is still
// named by the audit log's entries of calls that succeeded on it, and a new
// run takes an id above it. A call that failed names nothing taken.
TEST_F(FinishRunTest, RunIdNamedBySuccessfulAuditEntryIsNotGivenAgain) {
  for (const auto& [run_id, code] :
       std::vector<std::pair<int64_t, int32_t>>{{41, 0}, {99, 5}}) {
    AuditRecord entry;
    entry.at_ms = 1000;
    entry.principal = "ada";
    entry.method = "/skerry.v1.RunService/DeleteRun";
    entry.run_id = run_id;
    entry.peer = "ipv4:127.0.0.1:1";
    absl::StatusOr<int64_t> id = store_->access().BeginAudit(entry);
    ASSERT_TRUE(id.ok()) << id.status();
    entry.id = *id;
    entry.code = code;
    ASSERT_TRUE(store_->access().FinishAudit(entry).ok());
  }
  std::vector<GenomeRecord> genomes;
  EXPECT_EQ(CreateRun(1, &genomes).id, 42);
}

TEST_F(FinishRunTest, KeepThroughTrimsLaterGenerationsAndRecomputesChampion) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(2, &genomes);
  std::vector<GenomeRecord> a0(genomes.begin(), genomes.begin() + 4);
  std::vector<GenomeRecord> b0(genomes.begin() + 4, genomes.end());
  // Step evaluates the generation it is given and stores the next one. Island 0
  // reaches generation 3, island 1 generation 2; the run keeps 0..1. Generation
  // 1 holds a three-way tie at 0.5; the only better score (0.1, generation 2)
  // is trimmed.
  std::vector<GenomeRecord> a1 = Step(run, 0, a0, {9, 9, 9, 9});
  std::vector<GenomeRecord> a2 = Step(run, 0, a1, {9, 9, 9, 0.5});
  Step(run, 0, a2, {0.1, 9, 9, 9});
  std::vector<GenomeRecord> b1 = Step(run, 1, b0, {9, 9, 9, 9});
  Step(run, 1, b1, {9, 0.5, 0.5, 9});

  ASSERT_TRUE(store_->runs()
                  .FinishRun(run.id, skerry::v1::FINISHED, "target reached",
                             /*keep_through=*/1, 5000)
                  .ok());

  for (uint32_t island : {0u, 1u}) {
    absl::StatusOr<std::vector<GenomeRecord>> gone =
        store_->genomes().GetGeneration(run.id, island, 2);
    ASSERT_TRUE(gone.ok());
    EXPECT_TRUE(gone->empty()) << "island " << island << " generation 2";
    absl::StatusOr<std::vector<GenomeRecord>> kept =
        store_->genomes().GetGeneration(run.id, island, 1);
    ASSERT_TRUE(kept.ok());
    EXPECT_EQ(kept->size(), 4u) << "island " << island << " generation 1";
  }
  EXPECT_EQ(
      RawQuery(path(), "SELECT count(*) FROM genomes WHERE generation > 1"),
      "0");
  EXPECT_EQ(
      RawQuery(path(),
               "SELECT count(*) FROM generation_stats WHERE generation > 1"),
      "0");
  absl::StatusOr<std::vector<IslandRecord>> islands =
      store_->runs().GetIslands(run.id);
  ASSERT_TRUE(islands.ok());
  EXPECT_EQ((*islands)[0].generation, 1u);
  EXPECT_EQ((*islands)[1].generation, 1u);

  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->state, skerry::v1::FINISHED);
  EXPECT_EQ(stored->message, "target reached");
  ASSERT_TRUE(stored->stop_generation.has_value());
  EXPECT_EQ(*stored->stop_generation, 1u);
  // Tie rule (store.h): earliest generation (all 1), then lowest island (0).
  EXPECT_EQ(stored->champion_id, a1[3].id);
  ASSERT_TRUE(stored->best_score.has_value());
  EXPECT_EQ(*stored->best_score, 0.5);
  // Evaluations count what remains: generations 0 and 1 of both islands.
  EXPECT_EQ(stored->evaluations, 16);
}

TEST_F(FinishRunTest, WithoutKeepThroughEverythingStays) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  std::vector<GenomeRecord> g1 = Step(run, 0, genomes, {3, 2, 1, 4});
  ASSERT_TRUE(store_->runs()
                  .FinishRun(run.id, skerry::v1::STOPPED, "stopped by a user",
                             std::nullopt, 5000)
                  .ok());
  absl::StatusOr<std::vector<GenomeRecord>> kept =
      store_->genomes().GetGeneration(run.id, 0, 1);
  ASSERT_TRUE(kept.ok());
  EXPECT_EQ(kept->size(), 4u);
  absl::StatusOr<RunRecord> stored = store_->runs().GetRun(run.id);
  ASSERT_TRUE(stored.ok());
  EXPECT_EQ(stored->state, skerry::v1::STOPPED);
  EXPECT_EQ(stored->champion_id, genomes[2].id);
  EXPECT_FALSE(stored->stop_generation.has_value());
}

// The champion tie rule of GenomeStore::BestGenome, case by case.
TEST_F(StoreTest, BestGenomeBreaksTiesByGenerationThenIslandThenSlot) {
  struct Case {
    const char* name;
    // (island, generation, slot) of genomes scored 1.0; every other is 5.0.
    std::vector<std::array<uint32_t, 3>> tied;
    std::array<uint32_t, 3> want;
  };
  const std::vector<Case> cases = {
      {"earlier generation wins over lower island",
       {{0, 1, 0}, {1, 0, 3}},
       {1, 0, 3}},
      {"lower island wins over lower slot", {{1, 1, 0}, {0, 1, 3}}, {0, 1, 3}},
      {"lower slot wins", {{0, 1, 2}, {0, 1, 1}}, {0, 1, 1}},
  };
  for (const Case& tc : cases) {
    SCOPED_TRACE(tc.name);
    RunRecord run = MakeRun(SmallSpec(2));
    std::vector<GenomeRecord> all;
    for (uint32_t i = 0; i < 2; ++i) {
      for (uint32_t g = 0; g < 2; ++g) {
        for (uint32_t s = 0; s < 4; ++s) {
          GenomeRecord r = MakeGenome(i, g, s, 1.0);
          r.state = skerry::v1::EVALUATED;
          r.score = 5.0;
          for (const auto& t : tc.tied) {
            if (t[0] == i && t[1] == g && t[2] == s) r.score = 1.0;
          }
          all.push_back(r);
        }
      }
    }
    ASSERT_TRUE(store_->runs().CreateRun(&run, &all).ok());
    absl::StatusOr<std::optional<GenomeRecord>> best =
        store_->genomes().BestGenome(run.id);
    ASSERT_TRUE(best.ok()) << best.status();
    ASSERT_TRUE(best->has_value());
    EXPECT_EQ((*best)->island, tc.want[0]);
    EXPECT_EQ((*best)->generation, tc.want[1]);
    EXPECT_EQ((*best)->slot, tc.want[2]);
    EXPECT_EQ((*best)->score, 1.0);
  }
}

TEST_F(StoreTest, BestGenomeMaximisesForMaximiseRunsAndIgnoresFailed) {
  RunSpec spec = SmallSpec(1);
  spec.set_objective(skerry::v1::MAXIMIZE);
  RunRecord run = MakeRun(spec);
  std::vector<GenomeRecord> all = Generation0(1, 4);
  const double scores[] = {2.0, 8.0, 5.0, 0.0};
  for (int s = 0; s < 4; ++s) {
    all[s].state = skerry::v1::EVALUATED;
    all[s].score = scores[s];
  }
  all[1].state = skerry::v1::FAILED;  // the highest score, but failed
  ASSERT_TRUE(store_->runs().CreateRun(&run, &all).ok());
  absl::StatusOr<std::optional<GenomeRecord>> best =
      store_->genomes().BestGenome(run.id);
  ASSERT_TRUE(best.ok()) << best.status();
  ASSERT_TRUE(best->has_value());
  EXPECT_EQ((*best)->slot, 2u);
}

TEST_F(StoreTest, SetRunStateOfUnknownRunIsNotFound) {
  absl::Status s = store_->runs().SetRunState(77, skerry::v1::PAUSED, "", 1);
  EXPECT_EQ(s.code(), absl::StatusCode::kNotFound) << s;
  EXPECT_THAT(Message(s), HasSubstr("77"));
}

}  // namespace
}  // namespace skerry::store