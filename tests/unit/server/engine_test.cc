// Tests for the engine (server/engine/engine.h) on a real store in a temporary
// directory and a task queue on a fake clock. The test plays the fleet: it
// leases tasks and reports results (true sphere values unless a test says
// otherwise), then checks what the store holds.
#include "server/engine/engine.h"

#include <functional>
#include <map>
#include <memory>
#include <optional>
#include <string>
#include <tuple>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/clock.h"
#include "gmock/gmock.h"
#include "google/protobuf/text_format.h"
#include "gtest/gtest.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using skerry::testing::TempDir;
using skerry::v1::RunSpec;
using skerry::v1::Task;
using skerry::v1::TaskResult;
using store::GenomeRecord;
using ::testing::HasSubstr;

constexpr int64_t kWorker = 1;
constexpr uint32_t kIslands = 2;
constexpr uint32_t kPopulation = 6;
constexpr uint32_t kGenerations = 3;

// Sphere: sum of x_i^2 (Jamil & Yang 2013, see REFERENCES.md).
double SphereValue(const std::vector<double>& x) {
  double s = 0.0;
  for (double v : x) s += v * v;
  return s;
}

// Two islands of 6 on a 3-gene sphere for 3 generations, migrating every
// generation so that migration is exercised too.
RunSpec SmallSpec(uint64_t seed = 21) {
  RunSpec spec;
  spec.set_name("engine-test");
  spec.set_seed(seed);
  spec.set_genome_length(3);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(kPopulation);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_ga()->set_immigrants(1);
  spec.mutable_islands()->set_count(kIslands);
  spec.mutable_islands()->set_interval(1);
  spec.mutable_islands()->set_migrants(1);
  spec.mutable_stop()->set_max_generations(kGenerations);
  return spec;
}

// A coordinator minus the network: store, queue and engine, opened and closed
// together (as a restarted process would).
struct Coordinator {
  std::unique_ptr<store::Store> store;
  std::unique_ptr<scheduler::TaskQueue> queue;
  std::unique_ptr<Engine> engine;

  ~Coordinator() { Close(); }
  void Close() {
    engine.reset();  // joins the committer first
    queue.reset();
    store.reset();
  }
};

std::unique_ptr<Coordinator> OpenCoordinator(const std::string& path,
                                             Clock* clock) {
  auto c = std::make_unique<Coordinator>();
  absl::StatusOr<std::unique_ptr<store::Store>> store =
      store::Store::Open(path);
  EXPECT_TRUE(store.ok()) << store.status();
  if (!store.ok()) return nullptr;
  c->store = std::move(*store);
  c->queue = std::make_unique<scheduler::TaskQueue>(clock, absl::Seconds(30));
  absl::StatusOr<std::unique_ptr<Engine>> engine =
      Engine::Open(c->store.get(), c->queue.get(), clock);
  EXPECT_TRUE(engine.ok()) << engine.status();
  if (!engine.ok()) return nullptr;
  c->engine = std::move(*engine);
  return c;
}

// How the test fleet answers one task, given the genome it evaluates.
using Scorer = std::function<TaskResult(const Task&, const GenomeRecord&)>;

TaskResult TrueSphere(const Task& task, const GenomeRecord& /*genome*/) {
  TaskResult r;
  r.set_task_id(task.task_id());
  r.set_attempt(task.attempt());
  r.set_score(SphereValue({task.genes().begin(), task.genes().end()}));
  r.set_eval_seconds(0.01);
  return r;
}

bool IsActive(skerry::v1::RunState s) {
  return s == skerry::v1::QUEUED || s == skerry::v1::RUNNING ||
         s == skerry::v1::PAUSED;
}

// The run's state, after every commit in flight has been applied: Summary takes
// the engine's lock, which the committer holds until it has bred.
skerry::v1::RunState StateOf(Coordinator& c, int64_t run_id) {
  absl::StatusOr<skerry::v1::RunSummary> s = c.engine->Summary(run_id);
  EXPECT_TRUE(s.ok()) << s.status();
  return s.ok() ? s->state() : skerry::v1::RUN_STATE_UNSPECIFIED;
}

// Waits until the committer has finished what followed its last commit
// (breeding, queueing the next generation): it holds the engine's lock until
// then, and ListSummaries takes that lock.
void Settle(Coordinator& c) {
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> all =
      c.engine->ListSummaries();
  EXPECT_TRUE(all.ok()) << all.status();
}

// Reports `tasks` scored by `scorer` in one batch, and waits for what follows.
ReportOutcome ReportTasks(Coordinator& c, const std::vector<Task>& tasks,
                          const Scorer& scorer) {
  std::vector<TaskResult> results;
  for (const Task& t : tasks) {
    absl::StatusOr<GenomeRecord> g =
        c.store->genomes().GetGenome(static_cast<int64_t>(t.task_id()));
    EXPECT_TRUE(g.ok()) << g.status();
    if (!g.ok()) continue;
    results.push_back(scorer(t, *g));
  }
  absl::StatusOr<ReportOutcome> out = c.engine->Report(kWorker, results);
  EXPECT_TRUE(out.ok()) << out.status();
  Settle(c);
  return out.ok() ? *out : ReportOutcome();
}

// Leases and reports until the run is no longer active. Bounded; a stalled run
// (active with nothing to lease) fails the test.
void DriveToEnd(Coordinator& c, int64_t run_id,
                const Scorer& scorer = TrueSphere) {
  for (int round = 0; round < 200; ++round) {
    if (!IsActive(StateOf(c, run_id))) return;
    std::vector<Task> tasks =
        c.queue->Lease(kWorker, 1000, absl::ZeroDuration());
    if (tasks.empty()) {
      ADD_FAILURE() << "run " << run_id << " is active but has no tasks";
      return;
    }
    ReportTasks(c, tasks, scorer);
  }
  ADD_FAILURE() << "run " << run_id << " did not finish in 200 rounds";
}

// Every stored genome of a run, by natural key (island, generation, slot).
using Key = std::tuple<uint32_t, uint32_t, uint32_t>;

std::map<Key, GenomeRecord> AllGenomes(store::Store& s, int64_t run_id,
                                       uint32_t max_generation = 20) {
  std::map<Key, GenomeRecord> out;
  for (uint32_t i = 0; i < kIslands; ++i) {
    for (uint32_t g = 0; g <= max_generation; ++g) {
      absl::StatusOr<std::vector<GenomeRecord>> gen =
          s.genomes().GetGeneration(run_id, i, g);
      EXPECT_TRUE(gen.ok()) << gen.status();
      if (!gen.ok()) continue;
      for (GenomeRecord& r : *gen) out[{i, g, r.slot}] = std::move(r);
    }
  }
  return out;
}

// A genome as a reproducible value: parents by natural key, not by row id.
struct Comparable {
  std::vector<double> genes;
  double score;
  skerry::v1::EvalState state;
  skerry::v1::Origin origin;
  std::optional<Key> parent_a;
  std::optional<Key> parent_b;
  bool operator==(const Comparable& o) const {
    return genes == o.genes && score == o.score && state == o.state &&
           origin == o.origin && parent_a == o.parent_a &&
           parent_b == o.parent_b;
  }
};

std::map<Key, Comparable> Reproducible(const std::map<Key, GenomeRecord>& all) {
  std::map<int64_t, Key> key_of;
  for (const auto& [key, g] : all) key_of[g.id] = key;
  auto parent = [&](int64_t id) -> std::optional<Key> {
    if (id == 0) return std::nullopt;
    auto it = key_of.find(id);
    EXPECT_NE(it, key_of.end()) << "parent " << id << " is not stored";
    if (it == key_of.end()) return std::nullopt;
    return it->second;
  };
  std::map<Key, Comparable> out;
  for (const auto& [key, g] : all) {
    out[key] = {
        g.genes,           g.score, g.state, g.origin, parent(g.parent_a),
        parent(g.parent_b)};
  }
  return out;
}

std::string KeyName(const Key& k) {
  return absl::StrCat("island ", std::get<0>(k), " generation ", std::get<1>(k),
                      " slot ", std::get<2>(k));
}

class EngineTest : public ::testing::Test {
 protected:
  std::unique_ptr<Coordinator> Open(const std::string& name = "skerry.db") {
    return OpenCoordinator(dir_.File(name), &clock_);
  }

  int64_t Submit(Coordinator& c, RunSpec spec = SmallSpec()) {
    absl::StatusOr<store::RunRecord> run =
        c.engine->Submit(std::move(spec), "spec text", "alice");
    EXPECT_TRUE(run.ok()) << run.status();
    return run.ok() ? run->id : 0;
  }

  TempDir dir_;
  FakeClock clock_;
};

TEST_F(EngineTest, SmallRunFinishesWithEveryGenerationStoredAndLinked) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  const int64_t run_id = Submit(*c);
  DriveToEnd(*c, run_id);

  absl::StatusOr<store::RunRecord> run = c->store->runs().GetRun(run_id);
  ASSERT_TRUE(run.ok()) << run.status();
  EXPECT_EQ(run->state, skerry::v1::FINISHED) << run->message;

  const std::map<Key, GenomeRecord> all = AllGenomes(*c->store, run_id);
  EXPECT_EQ(all.size(), kIslands * kGenerations * kPopulation);
  std::map<int64_t, const GenomeRecord*> by_id;
  for (const auto& [key, g] : all) by_id[g.id] = &g;

  double min_score = 1e300;
  int evaluated_here = 0;
  int migrants = 0;
  for (const auto& [key, g] : all) {
    SCOPED_TRACE(KeyName(key));
    EXPECT_LT(g.generation, kGenerations);
    EXPECT_EQ(g.state, skerry::v1::EVALUATED);
    EXPECT_DOUBLE_EQ(g.score, SphereValue(g.genes));
    min_score = std::min(min_score, g.score);
    if (g.attempts > 0) ++evaluated_here;
    for (int64_t p : {g.parent_a, g.parent_b}) {
      if (p == 0) continue;
      auto it = by_id.find(p);
      ASSERT_NE(it, by_id.end()) << "parent " << p << " is not stored";
      EXPECT_EQ(it->second->generation + 1, g.generation)
          << "parent " << p << " is not of the previous generation";
    }
    switch (g.origin) {
      case skerry::v1::SEEDED:
        EXPECT_EQ(g.generation, 0u);
        [[fallthrough]];
      case skerry::v1::IMMIGRANT:
        EXPECT_EQ(g.parent_a, 0);
        EXPECT_EQ(g.parent_b, 0);
        break;
      case skerry::v1::CROSSOVER:
        EXPECT_NE(g.parent_b, 0);
        [[fallthrough]];
      default:
        EXPECT_NE(g.parent_a, 0);
    }
    if (g.origin == skerry::v1::MIGRANT) {
      ++migrants;
      EXPECT_NE(by_id.at(g.parent_a)->island, g.island)
          << "a migrant comes from another island";
    }
  }
  // Generations 1 and 2 are epochs (interval 1): one migrant per island each.
  EXPECT_EQ(migrants, 4);
  // The champion is the best of everything stored.
  ASSERT_TRUE(run->best_score.has_value());
  EXPECT_EQ(*run->best_score, min_score);
  ASSERT_TRUE(by_id.count(run->champion_id));
  EXPECT_EQ(by_id[run->champion_id]->score, min_score);
  EXPECT_EQ(run->evaluations, evaluated_here);

  absl::StatusOr<std::vector<store::StatsRecord>> stats =
      c->store->runs().GetStats(run_id, std::nullopt);
  ASSERT_TRUE(stats.ok());
  EXPECT_EQ(stats->size(), kIslands * kGenerations);
  EXPECT_THAT(c->queue->Lease(kWorker, 100, absl::ZeroDuration()),
              ::testing::IsEmpty());
}

TEST_F(EngineTest, RestartedRunEqualsAnUninterruptedOne) {
  // Reference: the same spec and seed, never interrupted, in another database.
  std::map<Key, Comparable> reference;
  {
    std::unique_ptr<Coordinator> c = Open("reference.db");
    ASSERT_NE(c, nullptr);
    const int64_t run_id = Submit(*c);
    DriveToEnd(*c, run_id);
    ASSERT_EQ(StateOf(*c, run_id), skerry::v1::FINISHED);
    reference = Reproducible(AllGenomes(*c->store, run_id));
  }

  int64_t run_id = 0;
  {
    std::unique_ptr<Coordinator> c = Open("restarted.db");
    ASSERT_NE(c, nullptr);
    run_id = Submit(*c);
    // Generation 0 whole, then half of generation 1; the other half is leased
    // and lost with the coordinator.
    ReportTasks(*c, c->queue->Lease(kWorker, 1000, absl::ZeroDuration()),
                TrueSphere);
    ASSERT_EQ(StateOf(*c, run_id), skerry::v1::RUNNING);
    std::vector<Task> tasks =
        c->queue->Lease(kWorker, 1000, absl::ZeroDuration());
    ASSERT_GT(tasks.size(), 2u);
    tasks.resize(tasks.size() / 2);
    ReportTasks(*c, tasks, TrueSphere);
    ASSERT_EQ(StateOf(*c, run_id), skerry::v1::RUNNING);
  }
  {
    std::unique_ptr<Coordinator> c = Open("restarted.db");
    ASSERT_NE(c, nullptr);
    // A second restart with a lease lost in flight.
    ASSERT_FALSE(c->queue->Lease(kWorker, 3, absl::ZeroDuration()).empty());
  }
  {
    std::unique_ptr<Coordinator> c = Open("restarted.db");
    ASSERT_NE(c, nullptr);
    DriveToEnd(*c, run_id);
    ASSERT_EQ(StateOf(*c, run_id), skerry::v1::FINISHED);
    const std::map<Key, Comparable> restarted =
        Reproducible(AllGenomes(*c->store, run_id));
    ASSERT_EQ(restarted.size(), reference.size());
    for (const auto& [key, want] : reference) {
      SCOPED_TRACE(KeyName(key));
      auto it = restarted.find(key);
      ASSERT_NE(it, restarted.end());
      EXPECT_TRUE(it->second == want);
    }
  }
}

TEST_F(EngineTest, DuplicateAndUnknownResultsAreIgnored) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  const int64_t run_id = Submit(*c);
  std::vector<Task> tasks =
      c->queue->Lease(kWorker, 1000, absl::ZeroDuration());
  ASSERT_EQ(tasks.size(), kIslands * kPopulation);

  ReportOutcome first = ReportTasks(*c, {tasks[0]}, TrueSphere);
  EXPECT_EQ(first.accepted, 1u);
  EXPECT_EQ(first.ignored, 0u);

  // The same result again, and once more with another score.
  ReportOutcome again = ReportTasks(*c, {tasks[0]}, TrueSphere);
  EXPECT_EQ(again.accepted, 0u);
  EXPECT_EQ(again.ignored, 1u);
  // Each ignored result says why.
  ASSERT_EQ(again.rejected.size(), 1u);
  EXPECT_EQ(again.rejected[0].task_id(), tasks[0].task_id());
  EXPECT_EQ(again.rejected[0].code(),
            static_cast<uint32_t>(absl::StatusCode::kNotFound));
  EXPECT_THAT(again.rejected[0].message(), ::testing::HasSubstr("duplicate"));
  auto other_score = [](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    r.set_score(-123.0);
    return r;
  };
  EXPECT_EQ(ReportTasks(*c, {tasks[0]}, other_score).ignored, 1u);
  absl::StatusOr<GenomeRecord> g =
      c->store->genomes().GetGenome(static_cast<int64_t>(tasks[0].task_id()));
  ASSERT_TRUE(g.ok());
  EXPECT_DOUBLE_EQ(g->score, SphereValue({tasks[0].genes().begin(),
                                          tasks[0].genes().end()}));

  // Twice in one batch: the first counts, the second is ignored.
  ReportOutcome twice = ReportTasks(*c, {tasks[1], tasks[1]}, TrueSphere);
  EXPECT_EQ(twice.accepted, 1u);
  EXPECT_EQ(twice.ignored, 1u);
  ASSERT_EQ(twice.rejected.size(), 1u);
  EXPECT_EQ(twice.rejected[0].code(),
            static_cast<uint32_t>(absl::StatusCode::kAborted));

  // A task nobody handed out.
  TaskResult unknown;
  unknown.set_task_id(987654321);
  unknown.set_attempt(1);
  unknown.set_score(1.0);
  absl::StatusOr<ReportOutcome> out = c->engine->Report(kWorker, {unknown});
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_EQ(out->accepted, 0u);
  EXPECT_EQ(out->ignored, 1u);

  absl::StatusOr<store::RunRecord> run = c->store->runs().GetRun(run_id);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(run->evaluations, 2);
}

TEST_F(EngineTest, GenomeFailingMaxAttemptsTimesIsFailedAndTheRunFinishes) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec = SmallSpec();
  spec.set_max_attempts(2);
  const int64_t run_id = Submit(*c, spec);
  // Island 0, generation 0, slot 3 always fails.
  int failures = 0;
  auto scorer = [&failures](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    if (g.island == 0 && g.generation == 0 && g.slot == 3) {
      r.set_error("simulator crashed");
      ++failures;
    }
    return r;
  };
  DriveToEnd(*c, run_id, scorer);
  EXPECT_EQ(failures, 2);

  absl::StatusOr<store::RunRecord> run = c->store->runs().GetRun(run_id);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(run->state, skerry::v1::FINISHED) << run->message;
  absl::StatusOr<std::vector<GenomeRecord>> gen0 =
      c->store->genomes().GetGeneration(run_id, 0, 0);
  ASSERT_TRUE(gen0.ok());
  ASSERT_EQ(gen0->size(), kPopulation);
  const GenomeRecord& failed = (*gen0)[3];
  EXPECT_EQ(failed.state, skerry::v1::FAILED);
  EXPECT_EQ(failed.attempts, 2u);
  EXPECT_EQ(failed.error, "simulator crashed");
  absl::StatusOr<std::vector<store::StatsRecord>> stats =
      c->store->runs().GetStats(run_id, 0);
  ASSERT_TRUE(stats.ok());
  ASSERT_FALSE(stats->empty());
  EXPECT_EQ((*stats)[0].failed, 1u);
  // Every other genome was evaluated.
  const std::map<Key, GenomeRecord> all = AllGenomes(*c->store, run_id);
  EXPECT_EQ(all.size(), kIslands * kGenerations * kPopulation);
  for (const auto& [key, g] : all) {
    if (g.id == failed.id) continue;
    // An elite copied from the failed genome would carry FAILED; the failed
    // genome ranks last, so none is.
    EXPECT_EQ(g.state, skerry::v1::EVALUATED) << KeyName(key);
  }
}

TEST_F(EngineTest, NonFiniteScoreCountsAsAFailedAttempt) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec = SmallSpec();
  spec.set_max_attempts(1);
  const int64_t run_id = Submit(*c, spec);
  std::vector<Task> tasks = c->queue->Lease(kWorker, 1, absl::ZeroDuration());
  ASSERT_EQ(tasks.size(), 1u);
  auto nan_scorer = [](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    r.set_score(std::nan(""));
    return r;
  };
  EXPECT_EQ(ReportTasks(*c, tasks, nan_scorer).accepted, 1u);
  absl::StatusOr<GenomeRecord> g =
      c->store->genomes().GetGenome(static_cast<int64_t>(tasks[0].task_id()));
  ASSERT_TRUE(g.ok());
  EXPECT_EQ(g->state, skerry::v1::FAILED);
  EXPECT_THAT(g->error, HasSubstr("not a finite number"));
  (void)run_id;
}

TEST_F(EngineTest, MetricsBeyondTheirBoundsMakeAFailedAttemptAndAreNotStored) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec = SmallSpec();
  spec.set_max_attempts(1);
  Submit(*c, spec);
  std::vector<Task> tasks = c->queue->Lease(kWorker, 2, absl::ZeroDuration());
  ASSERT_EQ(tasks.size(), 2u);
  // The first result's metrics are fine; the second's name has a space.
  int n = 0;
  auto scorer = [&n](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    (*r.mutable_metrics())[n++ == 0 ? "ok_name" : "bad name"] = 1.5;
    return r;
  };
  EXPECT_EQ(ReportTasks(*c, tasks, scorer).accepted, 2u);
  auto good =
      c->store->genomes().GetGenome(static_cast<int64_t>(tasks[0].task_id()));
  auto bad =
      c->store->genomes().GetGenome(static_cast<int64_t>(tasks[1].task_id()));
  ASSERT_TRUE(good.ok() && bad.ok());
  EXPECT_EQ(good->state, skerry::v1::EVALUATED);
  EXPECT_EQ(c->store->genomes().GetGenomeMetrics(good->id)->at("ok_name"), 1.5);
  EXPECT_EQ(bad->state, skerry::v1::FAILED);
  EXPECT_THAT(bad->error, HasSubstr("\"bad name\" may hold only"));
  EXPECT_TRUE(c->store->genomes().GetGenomeMetrics(bad->id)->empty());
}

TEST_F(EngineTest, TargetScoreStopsAtTheFirstGenerationReachingItAndTrims) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec = SmallSpec();
  spec.mutable_stop()->set_max_generations(10);
  spec.mutable_stop()->set_target_score(0.5);
  spec.mutable_islands()->set_interval(100);  // no migration in this test
  const int64_t run_id = Submit(*c, spec);

  // Scores chosen by the test: everything scores 1, except island 0's
  // generation 1 slot 3 (an offspring), which scores 0.25 and meets the target.
  auto scorer = [](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    r.set_score(g.island == 0 && g.generation == 1 && g.slot == 3 ? 0.25 : 1.0);
    return r;
  };
  auto lease_island = [&](uint32_t island, std::vector<Task>* held) {
    std::vector<Task> mine;
    for (Task& t : c->queue->Lease(kWorker, 1000, absl::ZeroDuration())) {
      absl::StatusOr<GenomeRecord> g =
          c->store->genomes().GetGenome(static_cast<int64_t>(t.task_id()));
      EXPECT_TRUE(g.ok());
      if (g.ok() && g->island == island) {
        mine.push_back(std::move(t));
      } else {
        held->push_back(std::move(t));
      }
    }
    return mine;
  };

  // Island 1 runs ahead to generation 3 while island 0 is held at generation 0.
  std::vector<Task> held0;
  for (uint32_t g = 0; g < 3; ++g) {
    std::vector<Task> island1 = lease_island(1, &held0);
    ASSERT_EQ(island1.size(), kPopulation - 1 + (g == 0 ? 1 : 0))
        << "generation " << g << " (the elite is carried over)";
    EXPECT_EQ(ReportTasks(*c, island1, scorer).accepted, island1.size());
  }
  ASSERT_EQ(held0.size(), kPopulation);
  std::vector<Task> island1_gen3;
  ASSERT_EQ(lease_island(0, &island1_gen3).size(), 0u);
  ASSERT_EQ(island1_gen3.size(), kPopulation - 1);

  // Island 0: generation 0, then generation 1 reaches the target.
  EXPECT_EQ(ReportTasks(*c, held0, scorer).accepted, kPopulation);
  std::vector<Task> none;
  std::vector<Task> island0_gen1 = lease_island(0, &none);
  ASSERT_EQ(island0_gen1.size(), kPopulation - 1);
  EXPECT_TRUE(none.empty());
  ReportTasks(*c, island0_gen1, scorer);

  absl::StatusOr<store::RunRecord> run = c->store->runs().GetRun(run_id);
  ASSERT_TRUE(run.ok());
  EXPECT_EQ(run->state, skerry::v1::FINISHED);
  EXPECT_THAT(run->message, HasSubstr("target score reached at generation 1"));
  ASSERT_TRUE(run->stop_generation.has_value());
  EXPECT_EQ(*run->stop_generation, 1u);
  ASSERT_TRUE(run->best_score.has_value());
  EXPECT_EQ(*run->best_score, 0.25);
  absl::StatusOr<GenomeRecord> champion =
      c->store->genomes().GetGenome(run->champion_id);
  ASSERT_TRUE(champion.ok());
  EXPECT_EQ(champion->island, 0u);
  EXPECT_EQ(champion->generation, 1u);
  EXPECT_EQ(champion->slot, 3u);

  // Island 1's generations 2 and 3 were bred past the stop and are gone.
  const std::map<Key, GenomeRecord> all = AllGenomes(*c->store, run_id);
  EXPECT_EQ(all.size(), kIslands * 2 * kPopulation);
  for (const auto& [key, g] : all) EXPECT_LE(g.generation, 1u) << KeyName(key);
  absl::StatusOr<std::vector<store::IslandRecord>> islands =
      c->store->runs().GetIslands(run_id);
  ASSERT_TRUE(islands.ok());
  for (const store::IslandRecord& i : *islands) EXPECT_EQ(i.generation, 1u);

  // Results for the discarded generation (its rows are gone) change nothing.
  std::vector<TaskResult> late;
  for (const Task& t : island1_gen3) late.push_back(TrueSphere(t, {}));
  absl::StatusOr<ReportOutcome> out = c->engine->Report(kWorker, late);
  ASSERT_TRUE(out.ok()) << out.status();
  EXPECT_EQ(out->accepted, 0u);
  EXPECT_EQ(out->ignored, island1_gen3.size());
}

// Regression (found by the strategy evidence re-run, issue 14): when genomes
// tie for the best score, the champion was the first one committed, so which
// island's generation committed first (the workers' timing) chose it, and with
// it the genome whose validation is stored. Ties now go to the smallest
// (generation, island, slot), the order `skerry champion` uses
// (GenomeStore::BestGenome), whatever the order of commits, across a restart
// too.
TEST_F(EngineTest, EqualBestScoresGoToTheSmallestKeyWhateverCommitsFirst) {
  RunSpec spec = SmallSpec();
  spec.mutable_islands()->set_interval(100);  // no migration in this test
  int64_t run_id = 0;
  auto everything_scores_one = [](const Task& t, const GenomeRecord& g) {
    TaskResult r = TrueSphere(t, g);
    r.set_score(1.0);
    return r;
  };
  // Leases everything queued: `island`'s tasks of generation 0, the others
  // into `others`.
  auto generation0_of = [](Coordinator& c, uint32_t island,
                           std::vector<Task>* others) {
    std::vector<Task> mine;
    for (Task& t : c.queue->Lease(kWorker, 1000, absl::ZeroDuration())) {
      absl::StatusOr<GenomeRecord> g =
          c.store->genomes().GetGenome(static_cast<int64_t>(t.task_id()));
      EXPECT_TRUE(g.ok()) << g.status();
      if (g.ok() && g->island == island && g->generation == 0) {
        mine.push_back(std::move(t));
      } else {
        others->push_back(std::move(t));
      }
    }
    return mine;
  };
  auto champion_of = [&](Coordinator& c) -> std::optional<Key> {
    absl::StatusOr<store::RunRecord> run = c.store->runs().GetRun(run_id);
    EXPECT_TRUE(run.ok()) << run.status();
    if (!run.ok() || run->champion_id == 0) return std::nullopt;
    absl::StatusOr<GenomeRecord> g =
        c.store->genomes().GetGenome(run->champion_id);
    EXPECT_TRUE(g.ok()) << g.status();
    if (!g.ok()) return std::nullopt;
    return Key{g->island, g->generation, g->slot};
  };
  {
    std::unique_ptr<Coordinator> c = Open();
    ASSERT_NE(c, nullptr);
    run_id = Submit(*c, spec);
    // Island 1's generation 0 commits first: its slot 0 is the champion.
    std::vector<Task> held;  // island 0's, leased and dropped at the restart
    std::vector<Task> island1 = generation0_of(*c, 1, &held);
    ASSERT_EQ(island1.size(), kPopulation);
    ReportTasks(*c, island1, everything_scores_one);
    EXPECT_EQ(champion_of(*c), (Key{1, 0, 0}));
  }
  // After a restart (the champion's key is read back), island 0's generation
  // 0 ties with it and has the smaller key: it takes over.
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  std::vector<Task> island1_next;
  std::vector<Task> island0 = generation0_of(*c, 0, &island1_next);
  ASSERT_EQ(island0.size(), kPopulation);
  ReportTasks(*c, island0, everything_scores_one);
  EXPECT_EQ(champion_of(*c), (Key{0, 0, 0}));
  ReportTasks(*c, island1_next, everything_scores_one);
  // Later generations tie too, with larger keys: the champion stays.
  DriveToEnd(*c, run_id, everything_scores_one);
  EXPECT_EQ(champion_of(*c), (Key{0, 0, 0}));
  absl::StatusOr<std::optional<GenomeRecord>> best =
      c->store->genomes().BestGenome(run_id);
  ASSERT_TRUE(best.ok()) << best.status();
  ASSERT_TRUE(best->has_value());
  EXPECT_EQ((Key{(*best)->island, (*best)->generation, (*best)->slot}),
            (Key{0, 0, 0}));
}

TEST_F(EngineTest, PauseStopsLeasingAndResumeResumes) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  const int64_t run_id = Submit(*c);
  ASSERT_TRUE(c->engine->Pause(run_id).ok());
  EXPECT_EQ(StateOf(*c, run_id), skerry::v1::PAUSED);
  EXPECT_THAT(c->queue->Lease(kWorker, 1000, absl::ZeroDuration()),
              ::testing::IsEmpty());
  absl::Status again = c->engine->Pause(run_id);
  EXPECT_EQ(again.code(), absl::StatusCode::kFailedPrecondition) << again;
  EXPECT_THAT(std::string(again.message()), HasSubstr("PAUSED"));

  ASSERT_TRUE(c->engine->Resume(run_id).ok());
  EXPECT_EQ(StateOf(*c, run_id), skerry::v1::RUNNING);
  EXPECT_EQ(c->queue->Lease(kWorker, 1000, absl::ZeroDuration()).size(),
            kIslands * kPopulation);
  EXPECT_EQ(c->engine->Resume(run_id).code(),
            absl::StatusCode::kFailedPrecondition);
}

TEST_F(EngineTest, PausedRunStaysPausedAcrossARestart) {
  int64_t run_id = 0;
  {
    std::unique_ptr<Coordinator> c = Open();
    ASSERT_NE(c, nullptr);
    run_id = Submit(*c);
    ASSERT_TRUE(c->engine->Pause(run_id).ok());
  }
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  EXPECT_EQ(StateOf(*c, run_id), skerry::v1::PAUSED);
  EXPECT_THAT(c->queue->Lease(kWorker, 1000, absl::ZeroDuration()),
              ::testing::IsEmpty());
  ASSERT_TRUE(c->engine->Resume(run_id).ok());
  DriveToEnd(*c, run_id);
  EXPECT_EQ(StateOf(*c, run_id), skerry::v1::FINISHED);
}

TEST_F(EngineTest, StoppedRunHandsOutNothingAndIgnoresLateResults) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  const int64_t run_id = Submit(*c);
  std::vector<Task> tasks = c->queue->Lease(kWorker, 3, absl::ZeroDuration());
  ASSERT_EQ(tasks.size(), 3u);
  ASSERT_TRUE(c->engine->Stop(run_id).ok());
  EXPECT_EQ(StateOf(*c, run_id), skerry::v1::STOPPED);
  EXPECT_THAT(c->queue->Lease(kWorker, 1000, absl::ZeroDuration()),
              ::testing::IsEmpty());
  EXPECT_EQ(ReportTasks(*c, tasks, TrueSphere).ignored, 3u);
  EXPECT_EQ(c->engine->Stop(run_id).code(),
            absl::StatusCode::kFailedPrecondition);
}

TEST_F(EngineTest, InvalidSpecIsRefusedNamingTheField) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec = SmallSpec();
  spec.set_genome_length(0);
  absl::StatusOr<store::RunRecord> run =
      c->engine->Submit(spec, "spec text", "alice");
  ASSERT_FALSE(run.ok());
  EXPECT_EQ(run.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(run.status().message()), HasSubstr("genome_length"));
  absl::StatusOr<std::vector<store::RunRecord>> runs =
      c->store->runs().ListRuns();
  ASSERT_TRUE(runs.ok());
  EXPECT_TRUE(runs->empty());
}

// A genome validated on request is kept whole from then on
// (GenomeStore::KeepWhole): a GA genome stored as its recipe alone becomes a
// keyframe with the same genes, and the run's digest does not change.
TEST_F(EngineTest, AGenomeValidatedOnRequestIsKeptWhole) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  RunSpec spec;
  ASSERT_TRUE(google::protobuf::TextFormat::ParseFromString(
      R"(name: "kept-whole"
         seed: 5
         evaluator {
           cart_pole { max_steps: 100 }
           validation { generalisation: true champions: ON_REQUEST }
         }
         ga {
           population_size: 6
           elites: 1
           keyframe_interval: 10
           crossover { rate: 0.5 }
           mutation { rate: 0.3 }
         }
         stop { max_generations: 4 })",
      &spec));
  const int64_t run_id = Submit(*c, spec);
  ASSERT_NE(run_id, 0);
  DriveToEnd(*c, run_id);
  absl::StatusOr<store::GenomeStore::Digest> before =
      c->store->genomes().RunDigest(run_id);
  ASSERT_TRUE(before.ok()) << before.status();

  // A bred genome of generation 2, stored as its recipe alone.
  absl::StatusOr<std::vector<GenomeRecord>> g2 =
      c->store->genomes().GetGeneration(run_id, 0, 2);
  ASSERT_TRUE(g2.ok()) << g2.status();
  const GenomeRecord* chosen = nullptr;
  for (const GenomeRecord& g : *g2) {
    if (g.child_recipe.has_value() && !g.keyframe &&
        g.origin != skerry::v1::ELITE) {
      chosen = &g;
      break;
    }
  }
  ASSERT_NE(chosen, nullptr) << "no genome of generation 2 is a recipe alone";

  absl::StatusOr<store::ValidationRecord> v =
      c->engine->RequestValidation(chosen->id, "alice");
  ASSERT_TRUE(v.ok()) << v.status();
  absl::StatusOr<GenomeRecord> kept = c->store->genomes().GetGenome(chosen->id);
  ASSERT_TRUE(kept.ok()) << kept.status();
  EXPECT_TRUE(kept->keyframe);
  EXPECT_EQ(kept->genes, chosen->genes);
  absl::StatusOr<store::GenomeStore::Digest> after =
      c->store->genomes().RunDigest(run_id);
  ASSERT_TRUE(after.ok()) << after.status();
  EXPECT_EQ(after->sha256, before->sha256);
}

TEST_F(EngineTest, ReportAfterShutdownIsUnavailable) {
  std::unique_ptr<Coordinator> c = Open();
  ASSERT_NE(c, nullptr);
  Submit(*c);
  std::vector<Task> tasks = c->queue->Lease(kWorker, 1, absl::ZeroDuration());
  ASSERT_EQ(tasks.size(), 1u);
  c->engine->Shutdown();
  TaskResult r;
  r.set_task_id(tasks[0].task_id());
  r.set_attempt(tasks[0].attempt());
  r.set_score(1.0);
  absl::StatusOr<ReportOutcome> out = c->engine->Report(kWorker, {r});
  EXPECT_EQ(out.status().code(), absl::StatusCode::kUnavailable);
}

}  // namespace
}  // namespace skerry::engine
