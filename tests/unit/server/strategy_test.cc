// Tests for the strategy interface (server/engine/strategy.h) as the GA
// implements it: the same generations as the breeder's own functions, the
// ask/tell protocol's errors, and saving and restoring.
#include "server/engine/strategy.h"

#include <algorithm>
#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include "common/genes.h"
#include "common/sample_recipe.h"
#include "common/spec.h"
#include "common/strategy_spec.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"
#include "tests/unit/server/strategy_test_util.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;

// Generation 0 of a spec the test knows is valid.
std::vector<GenomeRecord> Seeded(const RunSpec& spec, uint32_t island) {
  return Seed(spec, island).value();
}

RunSpec GaSpec() {
  RunSpec spec;
  spec.set_name("strategy-test");
  spec.set_seed(23);
  spec.set_genome_length(4);
  spec.mutable_evaluator()->mutable_builtin()->set_function("rastrigin");
  spec.mutable_ga()->set_population_size(12);
  spec.mutable_ga()->set_elites(2);
  spec.mutable_ga()->set_immigrants(1);
  spec.mutable_islands()->set_count(2);
  spec.mutable_islands()->set_interval(1);
  spec.mutable_islands()->set_migrants(2);
  absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : spec;
}

// Ids from first_id by slot; score = sum of squares.
std::vector<GenomeRecord> Evaluated(std::vector<GenomeRecord> gen,
                                    int64_t first_id) {
  for (GenomeRecord& g : gen) {
    g.id = first_id + g.slot;
    g.state = skerry::v1::EVALUATED;
    double s = 0.0;
    for (double x : g.genes) s += x * x;
    g.score = s;
    g.attempts = 1;
  }
  return gen;
}

void ExpectSameGeneration(const std::vector<GenomeRecord>& a,
                          const std::vector<GenomeRecord>& b) {
  ASSERT_EQ(a.size(), b.size());
  for (size_t i = 0; i < a.size(); ++i) {
    SCOPED_TRACE(i);
    EXPECT_EQ(a[i].slot, b[i].slot);
    EXPECT_EQ(a[i].generation, b[i].generation);
    EXPECT_EQ(a[i].origin, b[i].origin);
    EXPECT_EQ(a[i].parent_a, b[i].parent_a);
    EXPECT_EQ(a[i].parent_b, b[i].parent_b);
    EXPECT_EQ(a[i].parent_a_slot, b[i].parent_a_slot);
    EXPECT_EQ(a[i].genes, b[i].genes);  // bit for bit
    EXPECT_EQ(a[i].state, b[i].state);
  }
}

// The GA behind the interface makes exactly what Seed and Breed make, over
// several generations with migrants arriving every generation.
TEST(GaStrategyTest, MakesTheBreedersGenerationsBitForBit) {
  const RunSpec spec = GaSpec();
  absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 1);
  ASSERT_TRUE(made.ok()) << made.status();
  Strategy& ga = **made;
  absl::StatusOr<std::vector<GenomeRecord>> g0 = ga.Start();
  ASSERT_TRUE(g0.ok());
  ExpectSameGeneration(*g0, Seeded(spec, 1));

  std::vector<GenomeRecord> current = Evaluated(*g0, 100);
  const std::vector<GenomeRecord> other = Evaluated(Seeded(spec, 0), 1);
  for (int step = 0; step < 4; ++step) {
    std::vector<const GenomeRecord*> migrants = {&other[3], &other[5]};
    ASSERT_TRUE(ga.Tell(current, migrants).ok());
    absl::StatusOr<std::vector<GenomeRecord>> next = ga.Ask();
    ASSERT_TRUE(next.ok()) << next.status();
    absl::StatusOr<std::vector<GenomeRecord>> expected =
        Breed(spec, 1, current, migrants);
    ASSERT_TRUE(expected.ok());
    ExpectSameGeneration(*next, *expected);
    // The engine's call, which breeds from `current` without copying it,
    // gives the same generation.
    absl::StatusOr<std::vector<GenomeRecord>> direct =
        ga.TellAndAsk(current, migrants);
    ASSERT_TRUE(direct.ok()) << direct.status();
    ExpectSameGeneration(*direct, *expected);
    EXPECT_TRUE(absl::IsInvalidArgument(ga.TellAndAsk({}, {}).status()));
    EXPECT_EQ(ga.Save().generation(), current.front().generation + 1);
    current = Evaluated(*next, 1000 * (step + 2));
  }
}

TEST(GaStrategyTest, AskBeforeTellIsAnError) {
  absl::StatusOr<std::unique_ptr<Strategy>> ga = MakeStrategy(GaSpec(), 0);
  ASSERT_TRUE(ga.ok());
  ASSERT_TRUE((*ga)->Start().ok());
  EXPECT_TRUE(absl::IsFailedPrecondition((*ga)->Ask().status()));
  EXPECT_TRUE(absl::IsInvalidArgument((*ga)->Tell({}, {})));
}

// Restoring the state saved before a Tell undoes it: the engine relies on
// this when a generation's commit fails.
TEST(GaStrategyTest, RestoreUndoesATell) {
  const RunSpec spec = GaSpec();
  absl::StatusOr<std::unique_ptr<Strategy>> ga = MakeStrategy(spec, 0);
  ASSERT_TRUE(ga.ok());
  absl::StatusOr<std::vector<GenomeRecord>> g0 = (*ga)->Start();
  ASSERT_TRUE(g0.ok());
  const skerry::v1::StrategyState before = (*ga)->Save();
  EXPECT_EQ(before.kind_case(), skerry::v1::StrategyState::kGa);
  ASSERT_TRUE((*ga)->Tell(Evaluated(*g0, 1), {}).ok());
  ASSERT_TRUE((*ga)->Restore(before).ok());
  EXPECT_TRUE(absl::IsFailedPrecondition((*ga)->Ask().status()));
  EXPECT_EQ((*ga)->Save().SerializeAsString(), before.SerializeAsString());
}

// A run stored before strategy states were kept restores from an empty state.
TEST(GaStrategyTest, RestoresFromAnEmptyState) {
  absl::StatusOr<std::unique_ptr<Strategy>> ga = MakeStrategy(GaSpec(), 0);
  ASSERT_TRUE(ga.ok());
  EXPECT_TRUE((*ga)->Restore(skerry::v1::StrategyState()).ok());
}

}  // namespace
}  // namespace skerry::engine

namespace skerry::engine {
namespace {

RunSpec CmaSpec(const std::string& kind) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(
      "seed: 5 genome_length: 4 evaluator { builtin { function: "
      "\"sphere\" } } strategy { " +
          kind + " { } }",
      "cma.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

// A CMA-ES island saved after any generation and restored in a new instance
// (a restarted coordinator) makes the same generations bit for bit.
TEST(CmaStrategyTest, RestoredIslandContinuesBitForBit) {
  for (const std::string kind : {"cma_es", "sep_cma_es"}) {
    SCOPED_TRACE(kind);
    const RunSpec spec = CmaSpec(kind);
    absl::StatusOr<std::unique_ptr<Strategy>> a = MakeStrategy(spec, 0);
    ASSERT_TRUE(a.ok());
    absl::StatusOr<std::vector<GenomeRecord>> gen = (*a)->Start();
    ASSERT_TRUE(gen.ok());
    // 4 + floor(3 ln 4) samples after the distribution genome.
    EXPECT_EQ(gen->size(), 9u);
    EXPECT_EQ(gen->front().origin, skerry::v1::DISTRIBUTION);
    EXPECT_EQ(gen->back().origin, skerry::v1::SAMPLED);
    std::unique_ptr<Strategy> b;
    for (int g = 0; g < 12; ++g) {
      std::vector<GenomeRecord> done = Evaluated(*gen, 100 * (g + 1));
      if (g == 5) {
        absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 0);
        ASSERT_TRUE(made.ok());
        b = std::move(*made);
        ASSERT_TRUE(b->Restore((*a)->Save()).ok());
      }
      ASSERT_TRUE((*a)->Tell(done, {}).ok());
      gen = (*a)->Ask();
      ASSERT_TRUE(gen.ok());
      if (b != nullptr) {
        ASSERT_TRUE(b->Tell(done, {}).ok());
        absl::StatusOr<std::vector<GenomeRecord>> other = b->Ask();
        ASSERT_TRUE(other.ok());
        ExpectSameGeneration(*other, *gen);
      }
    }
    EXPECT_EQ(b->Save().SerializeAsString(), (*a)->Save().SerializeAsString());
  }
}

// A migrant better than every sample becomes the mean: the next generation
// is drawn around it.
TEST(CmaStrategyTest, ABetterMigrantMovesTheMean) {
  const RunSpec spec = CmaSpec("cma_es");
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  ASSERT_TRUE(s.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
  ASSERT_TRUE(gen.ok());
  GenomeRecord migrant;
  migrant.genes = {0.0, 0.0, 0.0, 0.0};
  migrant.state = skerry::v1::EVALUATED;
  migrant.score = -1.0;  // better than any sphere value
  const GenomeRecord* migrants[] = {&migrant};
  ASSERT_TRUE((*s)->Tell(Evaluated(*gen, 1), migrants).ok());
  const skerry::v1::StrategyState state = (*s)->Save();
  ASSERT_EQ(state.cma_es().search().mean_size(), 4);
  for (double m : state.cma_es().search().mean()) EXPECT_EQ(m, 0.0);
}

// The centre of an evolution strategy's search, as its saved state holds it.
std::vector<double> CentreOf(const skerry::v1::StrategyState& state) {
  if (state.has_natural_es()) {
    return {state.natural_es().centre().begin(),
            state.natural_es().centre().end()};
  }
  return {state.cma_es().search().mean().begin(),
          state.cma_es().search().mean().end()};
}

// Every evolution strategy starts each generation with its distribution
// genome: slot 0, origin DISTRIBUTION, the centre it samples around (clamped
// to the bounds), whose parents are the previous generation's distribution
// genome and the migrant that became the centre; every sample names it
// (parent_a_slot 0, filled with its id when stored).
TEST(DistributionGenomeTest, EachGenerationStartsWithTheCentreItsSamplesName) {
  for (const std::string kind : {"cma_es", "sep_cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    const RunSpec spec = CmaSpec(kind);
    ASSERT_TRUE(spec.strategy().distribution_genomes());  // the default
    absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
    ASSERT_TRUE(s.ok());
    absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
    ASSERT_TRUE(gen.ok());
    ASSERT_EQ(gen->size(), IslandPopulation(spec, 0));
    auto expect_layout = [&](const std::vector<GenomeRecord>& g, int64_t parent,
                             int64_t migrant) {
      const GenomeRecord& d = g.front();
      EXPECT_EQ(d.slot, 0u);
      EXPECT_EQ(d.origin, skerry::v1::DISTRIBUTION);
      EXPECT_EQ(d.parent_a, parent);
      EXPECT_EQ(d.parent_b, migrant);
      EXPECT_EQ(d.parent_a_slot, -1);
      EXPECT_EQ(d.genes, CentreOf((*s)->Save()));
      for (size_t i = 1; i < g.size(); ++i) {
        EXPECT_EQ(g[i].slot, i);
        EXPECT_EQ(g[i].origin, skerry::v1::SAMPLED);
        EXPECT_EQ(g[i].parent_a_slot, 0);
        EXPECT_EQ(g[i].parent_a, 0);
        EXPECT_EQ(g[i].parent_b, 0);
      }
    };
    expect_layout(*gen, 0, 0);
    ASSERT_TRUE((*s)->Tell(Evaluated(*gen, 100), {}).ok());
    gen = (*s)->Ask();
    ASSERT_TRUE(gen.ok());
    expect_layout(*gen, 100, 0);  // generation 0's distribution genome
    GenomeRecord migrant;
    migrant.id = 7777;
    migrant.genes = {0.5, -0.25, 0.0, 1.0};
    migrant.state = skerry::v1::EVALUATED;
    migrant.score = -1.0;  // better than any sphere value
    const GenomeRecord* migrants[] = {&migrant};
    ASSERT_TRUE((*s)->Tell(Evaluated(*gen, 200), migrants).ok());
    gen = (*s)->Ask();
    ASSERT_TRUE(gen.ok());
    expect_layout(*gen, 200, 7777);
    EXPECT_EQ(gen->front().genes, migrant.genes);
  }
}

// A migrant that is not better than the distribution genome's own score
// does not move the centre, even if it beats every sample.
TEST(DistributionGenomeTest, AMigrantMustBeatTheCentreToo) {
  for (const std::string kind : {"cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    absl::StatusOr<std::unique_ptr<Strategy>> s =
        MakeStrategy(CmaSpec(kind), 0);
    ASSERT_TRUE(s.ok());
    absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
    ASSERT_TRUE(gen.ok());
    std::vector<GenomeRecord> done = Evaluated(*gen, 100);
    done.front().score = -2.0;  // the centre beats everything
    GenomeRecord migrant;
    migrant.id = 7777;
    migrant.genes = {0.5, -0.25, 0.0, 1.0};
    migrant.state = skerry::v1::EVALUATED;
    migrant.score = -1.0;  // beats every sample, not the centre
    const GenomeRecord* migrants[] = {&migrant};
    ASSERT_TRUE((*s)->Tell(done, migrants).ok());
    gen = (*s)->Ask();
    ASSERT_TRUE(gen.ok());
    EXPECT_EQ(gen->front().parent_b, 0);
    EXPECT_NE(gen->front().genes, migrant.genes);
  }
}

// strategy.distribution_genomes: false (what a run stored before the field
// has): a generation is the samples alone, without parents.
TEST(DistributionGenomeTest, OffAGenerationIsTheSamplesAlone) {
  for (const std::string kind : {"cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    RunSpec spec = CmaSpec(kind);
    spec.mutable_strategy()->set_distribution_genomes(false);
    absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
    ASSERT_TRUE(s.ok());
    absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
    ASSERT_TRUE(gen.ok());
    ASSERT_EQ(gen->size(), EsPopulation(spec));
    ASSERT_EQ(gen->size(), IslandPopulation(spec, 0));
    for (const GenomeRecord& g : *gen) {
      EXPECT_EQ(g.origin, skerry::v1::SAMPLED);
      EXPECT_EQ(g.parent_a_slot, -1);
    }
    ASSERT_TRUE((*s)->Tell(Evaluated(*gen, 100), {}).ok());
    gen = (*s)->Ask();
    ASSERT_TRUE(gen.ok());
    EXPECT_EQ(gen->front().slot, 0u);
    EXPECT_EQ(gen->front().origin, skerry::v1::SAMPLED);
  }
}

TEST(CmaStrategyTest, AGaStateIsRefused) {
  absl::StatusOr<std::unique_ptr<Strategy>> s =
      MakeStrategy(CmaSpec("cma_es"), 0);
  ASSERT_TRUE(s.ok());
  skerry::v1::StrategyState ga;
  ga.mutable_ga();
  EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(ga)));
}

// gene_precision FLOAT32: every strategy's genomes, seeds and bred ones, are
// float32 values inside the bounds, and the nearest ones to what the same
// strategy makes at FLOAT64 (the rounding is the only difference at
// generation 0).
TEST(Float32StrategyTest, EveryStrategyMakesFloat32GenesInsideTheBounds) {
  for (const char* kind : {"ga", "cma_es", "sep_cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    RunSpec wide = GaSpec();
    if (std::string(kind) != "ga") {
      wide.clear_ga();
      RunSpec raw = wide;
      skerry::v1::StrategySpec* st = raw.mutable_strategy();
      if (std::string(kind) == "cma_es") st->mutable_cma_es();
      if (std::string(kind) == "sep_cma_es") st->mutable_sep_cma_es();
      if (std::string(kind) == "natural_es") st->mutable_natural_es();
      absl::StatusOr<RunSpec> prepared = PrepareSpec(raw);
      ASSERT_TRUE(prepared.ok()) << prepared.status();
      wide = *prepared;
    }
    RunSpec narrow = wide;
    narrow.set_gene_precision(skerry::v1::FLOAT32);
    ASSERT_TRUE(ValidateSpec(narrow).ok());
    absl::StatusOr<std::unique_ptr<Strategy>> a = MakeStrategy(wide, 0);
    absl::StatusOr<std::unique_ptr<Strategy>> b = MakeStrategy(narrow, 0);
    ASSERT_TRUE(a.ok() && b.ok());
    absl::StatusOr<std::vector<GenomeRecord>> ga = (*a)->Start();
    absl::StatusOr<std::vector<GenomeRecord>> gb = (*b)->Start();
    ASSERT_TRUE(ga.ok() && gb.ok());
    ga = testing::Built(*std::move(ga));
    gb = testing::Built(*std::move(gb));
    ASSERT_EQ(ga->size(), gb->size());
    for (size_t i = 0; i < ga->size(); ++i) {
      EXPECT_FALSE(FitsFloat32((*ga)[i].genes));  // random doubles
      ASSERT_TRUE(FitsFloat32((*gb)[i].genes)) << "slot " << i;
      // A natural ES sample is drawn around the centre as stored (rounded)
      // and then rounded: what its recipe rebuilds from the stored centre.
      std::vector<double> want;
      if ((*gb)[i].recipe.has_value()) {
        absl::StatusOr<std::vector<double>> built =
            BuildSample(*(*gb)[i].recipe, gb->front().genes);
        ASSERT_TRUE(built.ok()) << built.status();
        want = *built;
      }
      for (size_t j = 0; j < (*gb)[i].genes.size(); ++j) {
        const double x = (*ga)[i].genes[j];
        const double y = (*gb)[i].genes[j];
        if (!want.empty()) {
          EXPECT_EQ(y, want[j]);
          EXPECT_NEAR(y, x, 1e-6 * std::max(1.0, std::abs(x)));
        } else {
          EXPECT_EQ(y, static_cast<double>(static_cast<float>(x)));
        }
        EXPECT_GE(y, narrow.lower_bound());
        EXPECT_LE(y, narrow.upper_bound());
      }
    }
    // Bred generations too.
    ASSERT_TRUE((*b)->Tell(Evaluated(*gb, 1), {}).ok());
    absl::StatusOr<std::vector<GenomeRecord>> next = (*b)->Ask();
    ASSERT_TRUE(next.ok()) << next.status();
    for (const GenomeRecord& g : testing::Built(*next)) {
      EXPECT_TRUE(FitsFloat32(g.genes)) << "slot " << g.slot;
    }
  }
}

}  // namespace
}  // namespace skerry::engine
