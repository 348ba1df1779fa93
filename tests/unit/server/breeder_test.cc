// Tests for the generational GA step (server/engine/breeder.h): seeding, the
// layout of a bred generation, determinism, migrants, emigrant choice and the
// statistics of a generation.
#include "server/engine/breeder.h"

#include <algorithm>
#include <cmath>
#include <set>
#include <vector>

#include "absl/container/flat_hash_map.h"
#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using ::testing::HasSubstr;

// Generation 0 of a spec the test knows is valid.
std::vector<GenomeRecord> Seeded(const RunSpec& spec, uint32_t island) {
  return Seed(spec, island).value();
}

constexpr double kInitLower = -1.0;
constexpr double kInitUpper = 2.0;

// Sphere: sum of x_i^2 (Jamil & Yang 2013, see REFERENCES.md).
double SphereValue(const std::vector<double>& x) {
  double s = 0.0;
  for (double v : x) s += v * v;
  return s;
}

// Sphere in 3 dimensions; 20 per island, 2 elites, 2 immigrants, two islands
// exchanging 2 migrants every generation.
RunSpec SmallSpec(uint64_t seed = 17) {
  RunSpec spec;
  spec.set_name("breeder-test");
  spec.set_seed(seed);
  spec.set_genome_length(3);
  spec.set_init_lower(kInitLower);
  spec.set_init_upper(kInitUpper);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  auto* ga = spec.mutable_ga();
  ga->set_population_size(20);
  ga->set_elites(2);
  ga->set_immigrants(2);
  ga->mutable_crossover()->set_rate(0.5);
  ga->mutable_mutation()->set_rate(0.5);
  spec.mutable_islands()->set_count(2);
  spec.mutable_islands()->set_interval(1);
  spec.mutable_islands()->set_migrants(2);
  spec.mutable_stop()->set_max_generations(10);
  absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : spec;
}

// Gives a generation ids (first_id + slot) and true sphere scores.
std::vector<GenomeRecord> Evaluated(std::vector<GenomeRecord> gen,
                                    int64_t first_id) {
  for (GenomeRecord& g : gen) {
    g.id = first_id + g.slot;
    g.state = skerry::v1::EVALUATED;
    g.score = SphereValue(g.genes);
    g.attempts = 1;
  }
  return gen;
}

// Ids of a generation ordered best (lowest score) first, ties by slot.
std::vector<int64_t> IdsBestFirst(const std::vector<GenomeRecord>& gen) {
  std::vector<const GenomeRecord*> order;
  for (const GenomeRecord& g : gen) order.push_back(&g);
  std::stable_sort(order.begin(), order.end(),
                   [](const GenomeRecord* a, const GenomeRecord* b) {
                     return a->score < b->score;
                   });
  std::vector<int64_t> ids;
  for (const GenomeRecord* g : order) ids.push_back(g->id);
  return ids;
}

void ExpectSameGenomes(const std::vector<GenomeRecord>& a,
                       const std::vector<GenomeRecord>& b) {
  ASSERT_EQ(a.size(), b.size());
  for (size_t i = 0; i < a.size(); ++i) {
    SCOPED_TRACE(absl::StrCat("slot ", i));
    EXPECT_EQ(a[i].slot, b[i].slot);
    EXPECT_EQ(a[i].origin, b[i].origin);
    EXPECT_EQ(a[i].parent_a, b[i].parent_a);
    EXPECT_EQ(a[i].parent_b, b[i].parent_b);
    EXPECT_EQ(a[i].genes, b[i].genes);
    EXPECT_EQ(a[i].state, b[i].state);
    EXPECT_EQ(a[i].score, b[i].score);
  }
}

std::vector<GenomeRecord> MustBreed(
    const RunSpec& spec, uint32_t island,
    const std::vector<GenomeRecord>& current,
    const std::vector<const GenomeRecord*>& migrants = {}) {
  absl::StatusOr<std::vector<GenomeRecord>> bred =
      Breed(spec, island, current, migrants);
  EXPECT_TRUE(bred.ok()) << bred.status();
  return bred.ok() ? *bred : std::vector<GenomeRecord>();
}

// ---- Seed ----

TEST(SeedTest, MakesPopulationSizeGenomesInTheInitialRange) {
  const RunSpec spec = SmallSpec();
  const std::vector<GenomeRecord> gen = Seeded(spec, 1);
  ASSERT_EQ(gen.size(), 20u);
  for (uint32_t s = 0; s < gen.size(); ++s) {
    SCOPED_TRACE(absl::StrCat("slot ", s));
    const GenomeRecord& g = gen[s];
    EXPECT_EQ(g.slot, s);
    EXPECT_EQ(g.island, 1u);
    EXPECT_EQ(g.generation, 0u);
    EXPECT_EQ(g.origin, skerry::v1::SEEDED);
    EXPECT_EQ(g.state, skerry::v1::PENDING);
    EXPECT_EQ(g.parent_a, 0);
    EXPECT_EQ(g.parent_b, 0);
    EXPECT_EQ(g.id, 0);
    ASSERT_EQ(g.genes.size(), 3u);
    for (double x : g.genes) {
      EXPECT_GE(x, kInitLower);
      EXPECT_LT(x, kInitUpper);
    }
  }
}

TEST(SeedTest, HonoursPerIslandPopulationSizes) {
  RunSpec spec = SmallSpec();
  spec.mutable_islands()->add_population_sizes(6);
  spec.mutable_islands()->add_population_sizes(9);
  EXPECT_EQ(Seeded(spec, 0).size(), 6u);
  EXPECT_EQ(Seeded(spec, 1).size(), 9u);
}

TEST(SeedTest, SameSpecAndSeedGiveIdenticalGenesOtherSeedsDiffer) {
  ExpectSameGenomes(Seeded(SmallSpec(17), 0), Seeded(SmallSpec(17), 0));
  const std::vector<GenomeRecord> a = Seeded(SmallSpec(17), 0);
  const std::vector<GenomeRecord> b = Seeded(SmallSpec(18), 0);
  const std::vector<GenomeRecord> other_island = Seeded(SmallSpec(17), 1);
  for (size_t s = 0; s < a.size(); ++s) {
    EXPECT_NE(a[s].genes, b[s].genes) << "slot " << s;
    EXPECT_NE(a[s].genes, other_island[s].genes) << "slot " << s;
  }
}

// ---- Breed ----

TEST(BreedTest, LayoutIsElitesThenOffspringThenImmigrants) {
  const RunSpec spec = SmallSpec();
  const std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  const std::vector<int64_t> best = IdsBestFirst(current);
  std::set<int64_t> previous;
  for (const GenomeRecord& g : current) previous.insert(g.id);

  const std::vector<GenomeRecord> next = MustBreed(spec, 0, current);
  ASSERT_EQ(next.size(), 20u);
  int crossovers = 0;
  int mutations = 0;
  for (uint32_t s = 0; s < next.size(); ++s) {
    SCOPED_TRACE(absl::StrCat("slot ", s));
    const GenomeRecord& g = next[s];
    EXPECT_EQ(g.slot, s);
    EXPECT_EQ(g.generation, 1u);
    EXPECT_EQ(g.island, 0u);
    for (double x : g.genes) {
      EXPECT_GE(x, spec.lower_bound());
      EXPECT_LE(x, spec.upper_bound());
    }
    if (s < 2) {  // elites: the best, unchanged, score carried
      EXPECT_EQ(g.origin, skerry::v1::ELITE);
      EXPECT_EQ(g.parent_a, best[s]);
      EXPECT_EQ(g.parent_b, 0);
      const GenomeRecord& parent = current[best[s] - 100];
      EXPECT_EQ(g.genes, parent.genes);
      EXPECT_EQ(g.state, skerry::v1::EVALUATED);
      EXPECT_EQ(g.score, parent.score);
      EXPECT_EQ(g.attempts, 0u) << "carried over, not evaluated";
    } else if (s >= 18) {  // immigrants: fresh, no parents
      EXPECT_EQ(g.origin, skerry::v1::IMMIGRANT);
      EXPECT_EQ(g.parent_a, 0);
      EXPECT_EQ(g.parent_b, 0);
      EXPECT_EQ(g.state, skerry::v1::PENDING);
      for (double x : g.genes) {
        EXPECT_GE(x, kInitLower);
        EXPECT_LT(x, kInitUpper);
      }
    } else {  // offspring
      EXPECT_EQ(g.state, skerry::v1::PENDING);
      EXPECT_TRUE(previous.count(g.parent_a)) << g.parent_a;
      if (g.origin == skerry::v1::CROSSOVER) {
        ++crossovers;
        EXPECT_TRUE(previous.count(g.parent_b)) << g.parent_b;
      } else {
        ++mutations;
        EXPECT_EQ(g.origin, skerry::v1::MUTATION);
        EXPECT_EQ(g.parent_b, 0);
      }
    }
  }
  // With crossover rate 0.5 over 16 children, both kinds appear.
  EXPECT_GT(crossovers, 0);
  EXPECT_GT(mutations, 0);
}

TEST(BreedTest, MaximisingElitesAreTheHighestScores) {
  RunSpec spec = SmallSpec();
  spec.set_objective(skerry::v1::MAXIMIZE);
  const std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  std::vector<int64_t> best = IdsBestFirst(current);
  std::reverse(best.begin(), best.end());
  const std::vector<GenomeRecord> next = MustBreed(spec, 0, current);
  ASSERT_GE(next.size(), 2u);
  EXPECT_EQ(next[0].parent_a, best[0]);
  EXPECT_EQ(next[1].parent_a, best[1]);
}

TEST(BreedTest, FailedGenomesAreNeverElites) {
  const RunSpec spec = SmallSpec();
  std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  // The two genomes with the best scores failed: their scores mean nothing.
  const std::vector<int64_t> best = IdsBestFirst(current);
  current[best[0] - 100].state = skerry::v1::FAILED;
  current[best[1] - 100].state = skerry::v1::FAILED;
  const std::vector<GenomeRecord> next = MustBreed(spec, 0, current);
  ASSERT_GE(next.size(), 2u);
  EXPECT_EQ(next[0].parent_a, best[2]);
  EXPECT_EQ(next[1].parent_a, best[3]);
}

TEST(BreedTest, NoisyEvaluatorReEvaluatesElites) {
  RunSpec spec = SmallSpec();
  spec.mutable_evaluator()->set_noisy(true);
  const std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  const std::vector<GenomeRecord> next = MustBreed(spec, 0, current);
  ASSERT_GE(next.size(), 2u);
  EXPECT_EQ(next[0].origin, skerry::v1::ELITE);
  EXPECT_EQ(next[0].state, skerry::v1::PENDING);
}

TEST(BreedTest, IsAPureFunctionOfItsInputs) {
  const RunSpec spec = SmallSpec();
  const std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  const std::vector<GenomeRecord> first = MustBreed(spec, 0, current);
  // Other work in between (another island, other seeds) changes nothing.
  const std::vector<GenomeRecord> other = Evaluated(Seeded(spec, 1), 200);
  MustBreed(spec, 1, other);
  Seeded(SmallSpec(99), 0);
  const std::vector<GenomeRecord> second = MustBreed(spec, 0, current);
  ExpectSameGenomes(first, second);
  // A copy of the inputs gives the same.
  const std::vector<GenomeRecord> copy = current;
  ExpectSameGenomes(first, MustBreed(spec, 0, copy));
}

TEST(BreedTest, DifferentSeedOrIslandGivesDifferentOffspring) {
  const RunSpec spec = SmallSpec(17);
  const std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  const std::vector<GenomeRecord> a = MustBreed(spec, 0, current);
  const std::vector<GenomeRecord> b = MustBreed(SmallSpec(18), 0, current);
  std::vector<GenomeRecord> as_island1 = current;
  for (GenomeRecord& g : as_island1) g.island = 1;
  const std::vector<GenomeRecord> c = MustBreed(spec, 1, as_island1);
  int differ_seed = 0;
  int differ_island = 0;
  for (size_t s = 2; s < a.size(); ++s) {
    differ_seed += a[s].genes != b[s].genes;
    differ_island += a[s].genes != c[s].genes;
  }
  EXPECT_GT(differ_seed, 0);
  EXPECT_GT(differ_island, 0);
}

TEST(BreedTest, RawScalingWithNegativeScoreIsInvalidArgumentNamingGeneration) {
  RunSpec spec = SmallSpec();
  spec.set_objective(skerry::v1::MAXIMIZE);
  spec.mutable_ga()->mutable_selection()->set_method(skerry::v1::ROULETTE);
  spec.mutable_ga()->mutable_selection()->set_scaling(skerry::v1::RAW);
  std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  current[3].score = -1.0;
  absl::StatusOr<std::vector<GenomeRecord>> bred = Breed(spec, 0, current, {});
  ASSERT_FALSE(bred.ok());
  EXPECT_EQ(bred.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_THAT(std::string(bred.status().message()), HasSubstr("generation 0"));
}

// ---- Migration ----

class MigrationTest : public ::testing::Test {
 protected:
  // Island 0's generation 0 and island 1's, with scores; island 1's best two
  // are better than anything on island 0 so that selection wants them.
  void Build(uint64_t seed) {
    spec_ = SmallSpec(seed);
    own_ = Evaluated(Seeded(spec_, 0), 100);
    source_ = Evaluated(Seeded(spec_, 1), 500);
    source_[4].score = -2.0;  // not a sphere value: a marker, best by far
    source_[7].score = -1.0;
    migrants_ = ChooseEmigrants(spec_, source_, 0, 2);
  }

  RunSpec spec_;
  std::vector<GenomeRecord> own_;
  std::vector<GenomeRecord> source_;
  std::vector<const GenomeRecord*> migrants_;
};

TEST_F(MigrationTest, MigrantsLandAfterElitesWithTheirScores) {
  Build(17);
  ASSERT_EQ(migrants_.size(), 2u);
  const std::vector<GenomeRecord> next = MustBreed(spec_, 0, own_, migrants_);
  ASSERT_EQ(next.size(), 20u);
  EXPECT_EQ(next[0].origin, skerry::v1::ELITE);
  EXPECT_EQ(next[1].origin, skerry::v1::ELITE);
  for (uint32_t m = 0; m < 2; ++m) {
    const GenomeRecord& g = next[2 + m];
    SCOPED_TRACE(absl::StrCat("migrant ", m));
    EXPECT_EQ(g.origin, skerry::v1::MIGRANT);
    EXPECT_EQ(g.island, 0u);
    EXPECT_EQ(g.generation, 1u);
    EXPECT_EQ(g.slot, 2 + m);
    EXPECT_EQ(g.parent_a, migrants_[m]->id);
    EXPECT_EQ(g.parent_b, 0);
    EXPECT_EQ(g.genes, migrants_[m]->genes);
    EXPECT_EQ(g.state, skerry::v1::EVALUATED);
    EXPECT_EQ(g.score, migrants_[m]->score);
  }
  for (uint32_t s = 4; s < 18; ++s) {
    EXPECT_TRUE(next[s].origin == skerry::v1::CROSSOVER ||
                next[s].origin == skerry::v1::MUTATION)
        << "slot " << s;
  }
  EXPECT_EQ(next[18].origin, skerry::v1::IMMIGRANT);
  EXPECT_EQ(next[19].origin, skerry::v1::IMMIGRANT);
}

TEST_F(MigrationTest, ReplaceWorstTakesTheWorstOutOfTheBreedingPool) {
  // The pool is generation g with migrants in place of its worst members, so
  // offspring descend from island 0's genomes or from the migrants, never from
  // the replaced worst two; over a few seeds the migrants do become parents.
  bool migrant_was_parent = false;
  for (uint64_t seed = 1; seed <= 6; ++seed) {
    SCOPED_TRACE(absl::StrCat("seed ", seed));
    Build(seed);
    ASSERT_EQ(spec_.islands().replacement(), skerry::v1::REPLACE_WORST);
    const std::vector<int64_t> order = IdsBestFirst(own_);
    const std::set<int64_t> replaced = {order[order.size() - 1],
                                        order[order.size() - 2]};
    std::set<int64_t> allowed;
    for (const GenomeRecord& g : own_) {
      if (!replaced.count(g.id)) allowed.insert(g.id);
    }
    for (const GenomeRecord* m : migrants_) allowed.insert(m->id);

    const std::vector<GenomeRecord> next = MustBreed(spec_, 0, own_, migrants_);
    for (uint32_t s = 4; s < 18; ++s) {
      for (int64_t p : {next[s].parent_a, next[s].parent_b}) {
        if (p == 0) continue;
        EXPECT_TRUE(allowed.count(p)) << "slot " << s << " parent " << p;
        if (p >= 500) migrant_was_parent = true;
      }
    }
  }
  EXPECT_TRUE(migrant_was_parent);
}

TEST_F(MigrationTest, EmigrateBestPicksTheBestInOrder) {
  Build(17);
  ASSERT_EQ(spec_.islands().emigrants(), skerry::v1::EMIGRATE_BEST);
  ASSERT_EQ(migrants_.size(), 2u);
  EXPECT_EQ(migrants_[0]->id, 504);
  EXPECT_EQ(migrants_[1]->id, 507);
  // Asking for more than the generation holds gives every genome once.
  std::vector<const GenomeRecord*> all = ChooseEmigrants(spec_, source_, 0, 50);
  EXPECT_EQ(all.size(), source_.size());
  std::set<const GenomeRecord*> distinct(all.begin(), all.end());
  EXPECT_EQ(distinct.size(), source_.size());
}

TEST(ChooseEmigrantsTest, BestUnderMaximiseIsTheHighestAndSkipsFailed) {
  RunSpec spec = SmallSpec();
  spec.set_objective(skerry::v1::MAXIMIZE);
  std::vector<GenomeRecord> source = Evaluated(Seeded(spec, 1), 500);
  for (GenomeRecord& g : source) g.score = g.slot;  // slot 19 is the best
  source[19].state = skerry::v1::FAILED;
  std::vector<const GenomeRecord*> got = ChooseEmigrants(spec, source, 0, 3);
  ASSERT_EQ(got.size(), 3u);
  EXPECT_EQ(got[0]->slot, 18u);
  EXPECT_EQ(got[1]->slot, 17u);
  EXPECT_EQ(got[2]->slot, 16u);
}

TEST(ChooseEmigrantsTest, RandomAndTournamentChoicesAreDistinctAndRepeatable) {
  for (skerry::v1::EmigrantChoice choice :
       {skerry::v1::EMIGRATE_RANDOM, skerry::v1::EMIGRATE_TOURNAMENT}) {
    SCOPED_TRACE(skerry::v1::EmigrantChoice_Name(choice));
    RunSpec spec = SmallSpec();
    spec.mutable_islands()->set_emigrants(choice);
    const std::vector<GenomeRecord> source = Evaluated(Seeded(spec, 1), 500);
    std::vector<const GenomeRecord*> a = ChooseEmigrants(spec, source, 0, 5);
    std::vector<const GenomeRecord*> b = ChooseEmigrants(spec, source, 0, 5);
    EXPECT_EQ(a, b);
    EXPECT_EQ(std::set<const GenomeRecord*>(a.begin(), a.end()).size(), 5u);
  }
}

// ---- ComputeStats ----

GenomeRecord Scored(std::vector<double> genes, double score,
                    skerry::v1::EvalState state = skerry::v1::EVALUATED) {
  GenomeRecord g;
  g.genes = std::move(genes);
  g.score = score;
  g.state = state;
  g.attempts = 1;
  g.eval_seconds = 0.5;
  return g;
}

TEST(ComputeStatsTest, DiversityIsTheMeanPerGenePopulationStandardDeviation) {
  // Genes {0, 2} and {2, 4}: each gene has population standard deviation 1,
  // so diversity is 1 (common practice: population, not sample, deviation).
  const std::vector<GenomeRecord> gen = {Scored({0, 2}, 1.0),
                                         Scored({2, 4}, 2.0)};
  EXPECT_DOUBLE_EQ(ComputeStats(SmallSpec(), gen).diversity, 1.0);
}

TEST(ComputeStatsTest, DiversityMatchesTheTextbookStandardDeviationExample) {
  // The usual textbook example: 2, 4, 4, 4, 5, 5, 7, 9 has mean 5, squared
  // deviations summing to 32, variance 32 / 8 = 4 and population standard
  // deviation 2 (derived by hand). A constant second gene adds 0, so the mean
  // over the two genes is 1.
  std::vector<GenomeRecord> gen;
  for (double x : {2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0}) {
    gen.push_back(Scored({x, 3.0}, x));
  }
  EXPECT_DOUBLE_EQ(ComputeStats(SmallSpec(), gen).diversity, 1.0);
}

TEST(ComputeStatsTest, BestMeanWorstUnderMinimiseAndMaximise) {
  const std::vector<GenomeRecord> gen = {Scored({0}, 3.0), Scored({0}, 1.0),
                                         Scored({0}, 2.0), Scored({0}, 6.0)};
  RunSpec spec = SmallSpec();
  store::StatsRecord min = ComputeStats(spec, gen);
  EXPECT_EQ(min.best, 1.0);
  EXPECT_EQ(min.worst, 6.0);
  EXPECT_DOUBLE_EQ(min.mean, 3.0);
  EXPECT_EQ(min.evaluations, 4u);
  EXPECT_EQ(min.failed, 0u);
  EXPECT_DOUBLE_EQ(min.eval_seconds, 2.0);
  spec.set_objective(skerry::v1::MAXIMIZE);
  store::StatsRecord max = ComputeStats(spec, gen);
  EXPECT_EQ(max.best, 6.0);
  EXPECT_EQ(max.worst, 1.0);
  EXPECT_DOUBLE_EQ(max.mean, 3.0);
}

TEST(ComputeStatsTest, FailedGenomesAreExcludedFromBestMeanAndWorst) {
  std::vector<GenomeRecord> gen = {Scored({0}, 3.0), Scored({0}, 1.0),
                                   Scored({0}, -50.0, skerry::v1::FAILED),
                                   Scored({0}, 99.0, skerry::v1::FAILED)};
  store::StatsRecord s = ComputeStats(SmallSpec(), gen);
  EXPECT_EQ(s.best, 1.0);
  EXPECT_EQ(s.worst, 3.0);
  EXPECT_DOUBLE_EQ(s.mean, 2.0);
  EXPECT_EQ(s.failed, 2u);
  EXPECT_EQ(s.evaluations, 4u);
}

TEST(ComputeStatsTest, CarriedOverGenomesAreNotCountedAsEvaluations) {
  std::vector<GenomeRecord> gen = {Scored({0}, 3.0), Scored({0}, 1.0)};
  gen[0].attempts = 0;  // an elite copied from the previous generation
  EXPECT_EQ(ComputeStats(SmallSpec(), gen).evaluations, 1u);
}

TEST(ComputeStatsTest, KeyIsTakenFromTheGeneration) {
  std::vector<GenomeRecord> gen = {Scored({0}, 3.0)};
  gen[0].island = 1;
  gen[0].generation = 7;
  store::StatsRecord s = ComputeStats(SmallSpec(), gen);
  EXPECT_EQ(s.island, 1u);
  EXPECT_EQ(s.generation, 7u);
}

// ---- Better and EvalSeed ----

TEST(BetterTest, FollowsTheObjectiveStrictly) {
  RunSpec spec = SmallSpec();
  EXPECT_TRUE(Better(spec, 1.0, 2.0));
  EXPECT_FALSE(Better(spec, 2.0, 1.0));
  EXPECT_FALSE(Better(spec, 1.0, 1.0));
  spec.set_objective(skerry::v1::MAXIMIZE);
  EXPECT_TRUE(Better(spec, 2.0, 1.0));
  EXPECT_FALSE(Better(spec, 1.0, 1.0));
}

// ---- Recipes (common/child_recipe.h) ----

TEST(BreedRecipeTest, EveryGenomeRebuildsFromItsRecipeAndItsParentsAlone) {
  RunSpec spec = SmallSpec();
  spec.mutable_ga()->set_keyframe_interval(4);
  std::vector<GenomeRecord> current = Evaluated(Seeded(spec, 0), 100);
  const std::vector<GenomeRecord> source = Evaluated(Seeded(spec, 1), 500);
  std::vector<const GenomeRecord*> migrants = {&source[3], &source[7]};
  absl::flat_hash_map<int64_t, const GenomeRecord*> by_id;
  for (const GenomeRecord& g : current) by_id[g.id] = &g;
  for (const GenomeRecord& g : source) by_id[g.id] = &g;
  for (const GenomeRecord& g : current) {
    ASSERT_TRUE(g.child_recipe.has_value());
    EXPECT_EQ(g.child_recipe->kind, ChildKind::kSeed);
    EXPECT_FALSE(g.keyframe);  // a seed replays from its stream alone
    EXPECT_EQ(*BuildChild(*g.child_recipe, {}, {}), g.genes);
  }
  // Generation 4 is a keyframe: every genome with parents keeps its genes.
  for (GenomeRecord& g : current) g.generation = 3;
  const std::vector<GenomeRecord> next = MustBreed(spec, 0, current, migrants);
  ASSERT_EQ(next.size(), 20u);
  int kinds[6] = {};
  for (const GenomeRecord& g : next) {
    ASSERT_TRUE(g.child_recipe.has_value()) << g.slot;
    const ChildRecipe& r = *g.child_recipe;
    ++kinds[static_cast<int>(r.kind)];
    EXPECT_EQ(r.slot, g.slot);
    EXPECT_EQ(r.generation, 4u);
    EXPECT_EQ(g.keyframe, ParentsOf(r.kind) > 0) << g.slot;
    const std::vector<double>& a =
        g.parent_a != 0 ? by_id.at(g.parent_a)->genes : std::vector<double>();
    const std::vector<double>& b =
        g.parent_b != 0 ? by_id.at(g.parent_b)->genes : std::vector<double>();
    absl::StatusOr<std::vector<double>> rebuilt = BuildChild(r, a, b);
    ASSERT_TRUE(rebuilt.ok()) << rebuilt.status();
    EXPECT_EQ(*rebuilt, g.genes) << "slot " << g.slot;
  }
  EXPECT_EQ(kinds[static_cast<int>(ChildKind::kCopy)],
            4);  // 2 elites, 2 migrants
  EXPECT_EQ(kinds[static_cast<int>(ChildKind::kImmigrant)], 2);
  EXPECT_GT(kinds[static_cast<int>(ChildKind::kCrossover)], 0);
  EXPECT_GT(kinds[static_cast<int>(ChildKind::kMutation)], 0);
}

TEST(BreedRecipeTest, AnIntervalOfOneKeepsNoRecipeAndTheSameGenes) {
  RunSpec whole = SmallSpec();
  whole.mutable_ga()->set_keyframe_interval(1);
  RunSpec recipes = SmallSpec();
  recipes.mutable_ga()->set_keyframe_interval(7);
  const std::vector<GenomeRecord> a =
      MustBreed(whole, 0, Evaluated(Seeded(whole, 0), 100));
  const std::vector<GenomeRecord> b =
      MustBreed(recipes, 0, Evaluated(Seeded(recipes, 0), 100));
  ExpectSameGenomes(a, b);
  for (const GenomeRecord& g : a) EXPECT_FALSE(g.child_recipe.has_value());
  for (const GenomeRecord& g : b) EXPECT_TRUE(g.child_recipe.has_value());
  // The default: whole below 1,000 genes, recipes from there up.
  EXPECT_EQ(KeyframeInterval(SmallSpec()), 1u);
  RunSpec wide = SmallSpec();
  wide.set_genome_length(1000);
  EXPECT_EQ(KeyframeInterval(wide), 100u);
}

TEST(EvalSeedTest, IsAFunctionOfTheNaturalKey) {
  const RunSpec spec = SmallSpec();
  EXPECT_EQ(EvalSeed(spec, 0, 3, 5), EvalSeed(spec, 0, 3, 5));
  std::set<uint64_t> seen;
  for (uint32_t island = 0; island < 2; ++island) {
    for (uint32_t g = 0; g < 3; ++g) {
      for (uint32_t slot = 0; slot < 5; ++slot) {
        seen.insert(EvalSeed(spec, island, g, slot));
      }
    }
  }
  EXPECT_EQ(seen.size(), 30u);
  EXPECT_NE(EvalSeed(spec, 0, 3, 5), EvalSeed(SmallSpec(18), 0, 3, 5));
}

}  // namespace
}  // namespace skerry::engine
