// Tests for the strategy interface (server/engine/strategy.h) as the GA
// implements it: the same generations as the breeder's own functions, the
// ask/tell protocol's errors, and saving and restoring.
#include "server/engine/strategy.h"

#include <memory>
#include <string>
#include <vector>

#include "common/genes.h"
#include "common/spec.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;

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
  ExpectSameGeneration(*g0, Seed(spec, 1));

  std::vector<GenomeRecord> current = Evaluated(*g0, 100);
  const std::vector<GenomeRecord> other = Evaluated(Seed(spec, 0), 1);
  for (int step = 0; step < 4; ++step) {
    std::vector<const GenomeRecord*> migrants = {&other[3], &other[5]};
    ASSERT_TRUE(ga.Tell(current, migrants).ok());
    absl::StatusOr<std::vector<GenomeRecord>> next = ga.Ask();
    ASSERT_TRUE(next.ok()) << next.status();
    absl::StatusOr<std::vector<GenomeRecord>> expected =
        Breed(spec, 1, current, migrants);
    ASSERT_TRUE(expected.ok());
    ExpectSameGeneration(*next, *expected);
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
    EXPECT_EQ(gen->size(), 8u);  // 4 + floor(3 ln 4)
    EXPECT_EQ(gen->front().origin, skerry::v1::SAMPLED);
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
    ASSERT_EQ(ga->size(), gb->size());
    for (size_t i = 0; i < ga->size(); ++i) {
      EXPECT_FALSE(FitsFloat32((*ga)[i].genes));  // random doubles
      ASSERT_TRUE(FitsFloat32((*gb)[i].genes)) << "slot " << i;
      for (size_t j = 0; j < (*gb)[i].genes.size(); ++j) {
        const double x = (*ga)[i].genes[j];
        const double y = (*gb)[i].genes[j];
        EXPECT_EQ(y, static_cast<double>(static_cast<float>(x)));
        EXPECT_GE(y, narrow.lower_bound());
        EXPECT_LE(y, narrow.upper_bound());
      }
    }
    // Bred generations too.
    ASSERT_TRUE((*b)->Tell(Evaluated(*gb, 1), {}).ok());
    absl::StatusOr<std::vector<GenomeRecord>> next = (*b)->Ask();
    ASSERT_TRUE(next.ok()) << next.status();
    for (const GenomeRecord& g : *next) {
      EXPECT_TRUE(FitsFloat32(g.genes)) << "slot " << g.slot;
    }
  }
}

}  // namespace
}  // namespace skerry::engine
