// Lineage on a real run: the engine (server/engine/engine.h) drives a small
// island-model run on a real store, the test plays the fleet (true sphere
// values), then checks the stored parent links and holds every lineage query
// to a brute-force answer computed from the whole table in memory.
#include <algorithm>
#include <deque>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <utility>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/clock.h"
#include "common/genes.h"
#include "common/sample_recipe.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/engine.h"
#include "server/lineage/lineage_reader.h"
#include "server/scheduler/task_queue.h"
#include "server/store/check.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "tests/support/process.h"

namespace skerry::lineage {
namespace {

using skerry::testing::TempDir;
using skerry::v1::GenomeRef;
using skerry::v1::LineageNode;

constexpr uint32_t kIslands = 3;
constexpr uint32_t kGenerations = 8;

// Sphere: sum of x_i^2 (Jamil & Yang 2013, see REFERENCES.md).
double Sphere(const skerry::v1::Task& t) {
  double s = 0;
  for (double x : t.genes()) s += x * x;
  return s;
}

skerry::v1::RunSpec Spec() {
  skerry::v1::RunSpec spec;
  spec.set_name("lineage-run");
  spec.set_seed(5);
  spec.set_genome_length(3);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(10);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_ga()->set_immigrants(1);
  spec.mutable_islands()->set_count(kIslands);
  spec.mutable_islands()->set_interval(2);
  spec.mutable_islands()->set_migrants(2);
  spec.mutable_stop()->set_max_generations(kGenerations);
  return spec;
}

struct Genome {
  int64_t id;
  uint32_t island, generation;
  skerry::v1::Origin origin;
  int64_t a, b;
  std::string genes;
};

class LineageRunTest : public ::testing::Test {
 protected:
  virtual skerry::v1::RunSpec MakeSpec() const { return Spec(); }

  void SetUp() override {
    path_ = dir_.File("run.db");
    RunToEnd();
    LoadAll();
    auto r = LineageReader::Open(path_);
    ASSERT_TRUE(r.ok()) << r.status();
    reader_ = std::move(*r);
  }

  void RunToEnd() {
    FakeClock clock;
    auto store = store::Store::Open(path_);
    ASSERT_TRUE(store.ok()) << store.status();
    scheduler::TaskQueue queue(&clock, absl::Seconds(30));
    auto engine = engine::Engine::Open(store->get(), &queue, &clock);
    ASSERT_TRUE(engine.ok()) << engine.status();
    auto run = (*engine)->Submit(MakeSpec(), "spec", "test");
    ASSERT_TRUE(run.ok()) << run.status();
    run_id_ = run->id;
    for (int round = 0; round < 400; ++round) {
      auto summary = (*engine)->Summary(run_id_);
      ASSERT_TRUE(summary.ok());
      if (summary->state() == skerry::v1::FINISHED) break;
      std::vector<skerry::v1::Task> tasks =
          queue.Lease(1, 1000, absl::ZeroDuration());
      ASSERT_FALSE(tasks.empty()) << "run stalled";
      std::vector<skerry::v1::TaskResult> results;
      for (const auto& task : tasks) {
        skerry::v1::TaskResult r;
        r.set_task_id(task.task_id());
        r.set_attempt(task.attempt());
        r.set_score(Sphere(task));
        results.push_back(r);
      }
      ASSERT_TRUE((*engine)->Report(1, results).ok());
      ASSERT_TRUE((*engine)->ListSummaries().ok());  // let breeding finish
    }
    auto done = (*engine)->Summary(run_id_);
    ASSERT_TRUE(done.ok());
    ASSERT_EQ(done->state(), skerry::v1::FINISHED);
    engine->reset();
  }

  void LoadAll() {
    auto conn = store::Connection::Open(path_, SQLITE_OPEN_READONLY);
    ASSERT_TRUE(conn.ok());
    auto s = (*conn)->Prepare(
        "SELECT id, island, generation, origin, parent_a, parent_b, genes "
        "FROM genomes WHERE run_id = ?1");
    ASSERT_TRUE(s.ok());
    s->BindInt(1, run_id_);
    while (*s->Step()) {
      Genome g{s->ColumnInt(0),
               static_cast<uint32_t>(s->ColumnInt(1)),
               static_cast<uint32_t>(s->ColumnInt(2)),
               static_cast<skerry::v1::Origin>(s->ColumnInt(3)),
               s->ColumnIsNull(4) ? 0 : s->ColumnInt(4),
               s->ColumnIsNull(5) ? 0 : s->ColumnInt(5),
               s->ColumnBlob(6)};
      all_[g.id] = g;
    }
  }

  // Every ancestor no more than `depth` generations back (0: all).
  std::set<int64_t> BruteAncestors(int64_t id, uint32_t depth) const {
    const uint32_t gen = all_.at(id).generation;
    const uint32_t oldest = depth == 0 || depth > gen ? 0 : gen - depth;
    std::set<int64_t> seen;
    std::deque<int64_t> todo = {id};
    while (!todo.empty()) {
      const Genome& g = all_.at(todo.front());
      todo.pop_front();
      for (int64_t p : {g.a, g.b}) {
        if (p != 0 && all_.at(p).generation >= oldest &&
            seen.insert(p).second) {
          todo.push_back(p);
        }
      }
    }
    return seen;
  }

  std::set<int64_t> Ancestors(int64_t id, uint32_t depth) {
    skerry::v1::AncestorsRequest req;
    req.mutable_genome()->set_id(static_cast<uint64_t>(id));
    req.set_max_depth(depth);
    std::set<int64_t> out;
    absl::Status s = reader_->Ancestors(
        req, [](const LineageReader::StreamHead&) { return true; },
        [&](skerry::v1::LineageChunk& b) {
          for (const auto& n : b.nodes()) {
            EXPECT_TRUE(out.insert(static_cast<int64_t>(n.id())).second)
                << "listed twice: " << n.id();
          }
          return true;
        });
    EXPECT_TRUE(s.ok()) << s;
    return out;
  }

  std::vector<int64_t> LastGeneration() const {
    std::vector<int64_t> out;
    for (const auto& [id, g] : all_) {
      if (g.generation == kGenerations - 1) out.push_back(id);
    }
    return out;
  }

  // Checks the reader's common ancestor of a and b against brute force:
  // every common ancestor of the newest generation that has any. Returns
  // the answer's ids.
  std::set<int64_t> ExpectCommonAncestorIsBruteForces(int64_t a, int64_t b) {
    GenomeRef ra, rb;
    ra.set_id(static_cast<uint64_t>(a));
    rb.set_id(static_cast<uint64_t>(b));
    auto r = reader_->CommonAncestor(ra, rb);
    EXPECT_TRUE(r.ok()) << r.status();
    if (!r.ok()) return {};
    std::set<int64_t> sa = BruteAncestors(a, 0), sb = BruteAncestors(b, 0);
    sa.insert(a);
    sb.insert(b);
    uint32_t newest = 0;
    bool any = false;
    std::set<int64_t> want;
    for (int64_t x : sa) {
      if (sb.count(x) == 0) continue;
      const uint32_t g = all_.at(x).generation;
      if (!any || g > newest) want.clear();
      if (!any || g >= newest) {
        want.insert(x);
        newest = g;
        any = true;
      }
    }
    EXPECT_EQ(r->found(), any);
    std::set<int64_t> got;
    for (const auto& n : r->ancestors())
      got.insert(static_cast<int64_t>(n.id()));
    EXPECT_EQ(got, want);
    if (any) {
      EXPECT_EQ(r->depth_a(), all_.at(a).generation - newest);
      EXPECT_EQ(r->depth_b(), all_.at(b).generation - newest);
    }
    return got;
  }

  // Coalescence of the last generation of every island against brute force.
  void ExpectCoalescenceIsBruteForces() {
    skerry::v1::CoalescenceRequest req;
    req.mutable_population()->set_run_id(static_cast<uint64_t>(run_id_));
    req.mutable_population()->set_generation(kGenerations - 1);
    req.mutable_population()->set_all_islands(true);
    auto r = reader_->Coalescence(req);
    ASSERT_TRUE(r.ok()) << r.status();
    std::set<int64_t> all;
    for (int64_t id : LastGeneration()) {
      all.insert(id);
      std::set<int64_t> anc = BruteAncestors(id, 0);
      all.insert(anc.begin(), anc.end());
    }
    std::map<uint32_t, uint64_t> per_gen;
    for (int64_t id : all) ++per_gen[all_.at(id).generation];
    ASSERT_EQ(r->levels_size(), static_cast<int>(per_gen.size()));
    for (const auto& level : r->levels()) {
      EXPECT_EQ(level.ancestors(), per_gen[level.generation()])
          << "generation " << level.generation();
    }
  }

  // Ancestors of every genome of the last generation against brute force.
  void ExpectAncestorsAreBruteForces() {
    for (int64_t id : LastGeneration()) {
      SCOPED_TRACE(::testing::Message() << "genome " << id);
      for (uint32_t depth : {1u, 3u, 0u}) {
        EXPECT_EQ(Ancestors(id, depth), BruteAncestors(id, depth))
            << "depth " << depth;
      }
    }
  }

  TempDir dir_;
  std::string path_;
  int64_t run_id_ = 0;
  std::map<int64_t, Genome> all_;
  std::unique_ptr<LineageReader> reader_;
};

TEST_F(LineageRunTest, EveryParentExistsAndIsFromTheGenerationBefore) {
  ASSERT_EQ(all_.size(), kIslands * kGenerations * 10);
  int migrants = 0, elites = 0;
  for (const auto& [id, g] : all_) {
    SCOPED_TRACE(::testing::Message() << "genome " << id);
    for (int64_t p : {g.a, g.b}) {
      if (p == 0) continue;
      ASSERT_EQ(all_.count(p), 1u) << "parent " << p << " is not stored";
      EXPECT_EQ(all_.at(p).generation + 1, g.generation);
    }
    switch (g.origin) {
      case skerry::v1::SEEDED:
      case skerry::v1::IMMIGRANT:
        EXPECT_EQ(g.a, 0);
        EXPECT_EQ(g.b, 0);
        EXPECT_EQ(g.origin == skerry::v1::SEEDED, g.generation == 0);
        break;
      case skerry::v1::MIGRANT:
        ++migrants;
        ASSERT_NE(g.a, 0);
        EXPECT_EQ(g.b, 0);
        EXPECT_NE(all_.at(g.a).island, g.island);  // from another island
        EXPECT_EQ(all_.at(g.a).genes, g.genes);
        break;
      case skerry::v1::ELITE:
        ++elites;
        ASSERT_NE(g.a, 0);
        EXPECT_EQ(g.b, 0);
        EXPECT_EQ(all_.at(g.a).island, g.island);
        EXPECT_EQ(all_.at(g.a).genes, g.genes);  // same genes, one earlier
        break;
      case skerry::v1::CROSSOVER:
        EXPECT_NE(g.a, 0);
        EXPECT_NE(g.b, 0);
        break;
      case skerry::v1::MUTATION:
        EXPECT_NE(g.a, 0);
        EXPECT_EQ(g.b, 0);
        break;
      default:
        ADD_FAILURE() << "unexpected origin " << g.origin;
    }
  }
  // Epochs at generations 2, 4, 6; ring: each island receives 2 per epoch.
  EXPECT_EQ(migrants, 3 * kIslands * 2);
  EXPECT_EQ(elites, (kGenerations - 1) * kIslands);
}

TEST_F(LineageRunTest, AncestorsMatchABruteForceWalk) {
  ExpectAncestorsAreBruteForces();
}

TEST_F(LineageRunTest, LineOfDescentIsAChainOfParentsToAFounder) {
  GenomeRef champion;
  champion.set_champion_of_run(static_cast<uint64_t>(run_id_));
  auto line = reader_->LineOfDescent(champion);
  ASSERT_TRUE(line.ok()) << line.status();
  const auto& steps = line->steps();
  for (int i = 0; i + 1 < steps.size(); ++i) {
    const Genome& child = all_.at(static_cast<int64_t>(steps[i].id()));
    const int64_t parent = static_cast<int64_t>(steps[i + 1].id());
    EXPECT_TRUE(parent == child.a || parent == child.b);
    // Minimising: the step's parent is never worse than the other parent.
    if (child.b != 0 && parent == child.b) {
      EXPECT_LT(steps[i + 1].score(),
                reader_
                    ->Resolve([&] {
                      GenomeRef r;
                      r.set_id(static_cast<uint64_t>(child.a));
                      return r;
                    }())
                    ->score());
    }
  }
  const auto& founder = steps[steps.size() - 1];
  EXPECT_TRUE(founder.key().generation() == 0 ||
              founder.origin() == skerry::v1::IMMIGRANT);
  auto attribution = reader_->Attribution(champion);
  ASSERT_TRUE(attribution.ok()) << attribution.status();
  // Sphere scores of a line telescope: the gains sum to founder - champion.
  EXPECT_NEAR(attribution->total_gain(), founder.score() - steps[0].score(),
              1e-9);
}

TEST_F(LineageRunTest, CommonAncestorIsCommonAndNoNewerOneExists) {
  const std::vector<int64_t> last = LastGeneration();
  std::vector<std::pair<int64_t, int64_t>> pairs;
  for (size_t i = 0; i + 1 < last.size(); i += 7) {
    pairs.push_back({last[i], last[i + 1]});
    // And one from a middle generation, on whatever island.
    for (const auto& [id, g] : all_) {
      if (g.generation == kGenerations / 2 && id % 5 == last[i] % 5) {
        pairs.push_back({last[i], id});
        break;
      }
    }
  }
  for (const auto& [a, b] : pairs) {
    SCOPED_TRACE(::testing::Message() << a << " and " << b);
    ExpectCommonAncestorIsBruteForces(a, b);
  }
}

TEST_F(LineageRunTest, CoalescenceOfTheLastGenerationMatchesBruteForce) {
  ExpectCoalescenceIsBruteForces();
}

// The same queries on a natural ES run: each generation starts with its
// distribution genome (the search centre, slot 0), which names the one
// before it, and every sample names its own generation's distribution genome:
// the one link in Skerry within a generation (docs/lineage.md).
class LineageEsRunTest : public LineageRunTest {
 protected:
  static constexpr uint32_t kSamples = 6;

  skerry::v1::RunSpec MakeSpec() const override {
    skerry::v1::RunSpec spec = Spec();
    spec.clear_ga();
    spec.mutable_strategy()->mutable_natural_es()->set_population_size(
        kSamples);
    spec.mutable_strategy()->mutable_natural_es()->set_sigma(0.5);
    return spec;
  }

  // The distribution genome of the island's generation.
  int64_t CentreOf(uint32_t island, uint32_t generation) const {
    for (const auto& [id, g] : all_) {
      if (g.island == island && g.generation == generation &&
          g.origin == skerry::v1::DISTRIBUTION) {
        return id;
      }
    }
    return 0;
  }
};

TEST_F(LineageEsRunTest, EachSampleNamesItsGenerationsDistributionGenome) {
  ASSERT_EQ(all_.size(), kIslands * kGenerations * (kSamples + 1));
  int migrants_adopted = 0;
  for (const auto& [id, g] : all_) {
    SCOPED_TRACE(::testing::Message() << "genome " << id);
    const int64_t centre = CentreOf(g.island, g.generation);
    ASSERT_NE(centre, 0) << "island " << g.island << " generation "
                         << g.generation << " has no distribution genome";
    if (g.origin == skerry::v1::SAMPLED) {
      // Stored as its recipe: the genes come from the centre and the key.
      EXPECT_TRUE(IsRecipe(g.genes)) << g.genes.size() << " bytes";
      EXPECT_EQ(g.a, centre);
      EXPECT_EQ(g.b, 0);
      EXPECT_LT(g.a, id);  // stored first
      continue;
    }
    ASSERT_EQ(g.origin, skerry::v1::DISTRIBUTION);
    if (g.generation == 0) {
      EXPECT_EQ(g.a, 0);
      EXPECT_EQ(g.b, 0);
    } else {
      EXPECT_EQ(g.a, CentreOf(g.island, g.generation - 1));
    }
    if (g.b != 0) {
      ++migrants_adopted;
      EXPECT_NE(all_.at(g.b).island, g.island);  // the migrant's own island
      EXPECT_EQ(all_.at(g.b).generation + 1, g.generation);
      // It became the centre: a sample's genes rebuilt from its recipe.
      std::string migrant = all_.at(g.b).genes;
      if (IsRecipe(migrant)) {
        absl::StatusOr<SampleRecipe> r = UnpackRecipe(migrant);
        ASSERT_TRUE(r.ok()) << r.status();
        absl::StatusOr<std::vector<double>> its_centre =
            UnpackGenes(all_.at(all_.at(g.b).a).genes);
        ASSERT_TRUE(its_centre.ok()) << its_centre.status();
        absl::StatusOr<std::vector<double>> built =
            BuildSample(*r, *its_centre);
        ASSERT_TRUE(built.ok()) << built.status();
        migrant = PackGenes(*built);
      }
      EXPECT_EQ(migrant, g.genes);
    }
  }
  // Migrants arrive at generations 2, 4 and 6; whether a centre takes one
  // depends on the scores, so only the bound is fixed.
  EXPECT_LE(migrants_adopted, 3 * static_cast<int>(kIslands));
}

// `--check` holds the run's links to the rules of docs/lineage.md, and
// finds a sample linked to another generation's distribution genome.
TEST_F(LineageEsRunTest, CheckPassesTheRunAndFindsAMislinkedSample) {
  absl::StatusOr<store::CheckReport> clean = store::CheckDatabase(path_);
  ASSERT_TRUE(clean.ok()) << clean.status();
  EXPECT_TRUE(clean->problems.empty()) << clean->ToString();
  {
    auto conn = store::Connection::Open(path_, SQLITE_OPEN_READWRITE);
    ASSERT_TRUE(conn.ok()) << conn.status();
    ASSERT_TRUE((*conn)
                    ->Exec(absl::StrCat(
                        "UPDATE genomes SET parent_a = ", CentreOf(0, 2),
                        " WHERE island = 0 AND generation = 3 "
                        "AND slot = 2"))
                    .ok());
  }
  absl::StatusOr<store::CheckReport> report = store::CheckDatabase(path_);
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(report->ToString(),
              ::testing::HasSubstr("sample's parent is not its generation's "
                                   "distribution genome"));
}

TEST_F(LineageEsRunTest, AncestorsMatchABruteForceWalk) {
  ExpectAncestorsAreBruteForces();
}

TEST_F(LineageEsRunTest, CommonAncestorOfTwoSamplesIsTheirCentre) {
  const std::vector<int64_t> last = LastGeneration();
  std::vector<std::pair<int64_t, int64_t>> pairs;
  for (int64_t a : last) {
    for (int64_t b : last) {
      if (a < b) pairs.push_back({a, b});  // samples and centres, all islands
    }
  }
  for (const auto& [a, b] : pairs) {
    SCOPED_TRACE(::testing::Message() << a << " and " << b);
    const std::set<int64_t> got = ExpectCommonAncestorIsBruteForces(a, b);
    const Genome& ga = all_.at(a);
    const Genome& gb = all_.at(b);
    if (ga.island == gb.island) {
      // Same island, same generation: their centre (or one of them, if it
      // is the centre), in their own generation.
      // (depth 0 from both: ExpectCommonAncestorIsBruteForces).
      EXPECT_EQ(got, std::set<int64_t>{CentreOf(ga.island, ga.generation)});
    }
  }
}

TEST_F(LineageEsRunTest, LineOfDescentRunsThroughTheCentres) {
  GenomeRef champion;
  champion.set_champion_of_run(static_cast<uint64_t>(run_id_));
  auto line = reader_->LineOfDescent(champion);
  ASSERT_TRUE(line.ok()) << line.status();
  const auto& steps = line->steps();
  ASSERT_GE(steps.size(), 1);
  for (int i = 0; i + 1 < steps.size(); ++i) {
    const Genome& child = all_.at(static_cast<int64_t>(steps[i].id()));
    const int64_t parent = static_cast<int64_t>(steps[i + 1].id());
    EXPECT_TRUE(parent == child.a || parent == child.b);
    if (parent == child.b) {
      // A migrant from another island that became the centre: the line
      // crosses to it when it is the fitter parent.
      EXPECT_EQ(child.origin, skerry::v1::DISTRIBUTION);
      EXPECT_NE(all_.at(parent).island, child.island);
    } else {
      EXPECT_EQ(steps[i + 1].origin(), skerry::v1::DISTRIBUTION);
    }
  }
  const auto& founder = steps[steps.size() - 1];
  EXPECT_EQ(founder.key().generation(), 0u);
  EXPECT_EQ(founder.origin(), skerry::v1::DISTRIBUTION);
  auto attribution = reader_->Attribution(champion);
  ASSERT_TRUE(attribution.ok()) << attribution.status();
  EXPECT_NEAR(attribution->total_gain(), founder.score() - steps[0].score(),
              1e-9);
}

TEST_F(LineageEsRunTest, CoalescenceHasOneLevelPerGeneration) {
  ExpectCoalescenceIsBruteForces();
}

}  // namespace
}  // namespace skerry::lineage
