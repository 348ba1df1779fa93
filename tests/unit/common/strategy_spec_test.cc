// Tests for the `strategy` part of a run spec (common/strategy_spec.h): the
// GA's two spellings, the CMA-ES defaults, and errors naming the field.
#include "common/strategy_spec.h"

#include <string>

#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

absl::StatusOr<skerry::v1::RunSpec> Prepare(const std::string& extra,
                                            bool noisy = false) {
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(
      "genome_length: 10 evaluator { builtin { function: \"sphere\" } } " +
          extra,
      "test.spec");
  if (!spec.ok()) return spec.status();
  spec->mutable_evaluator()->set_noisy(noisy);
  return PrepareSpec(*spec);
}

TEST(StrategySpecTest, StrategyGaMeansTheTopLevelGa) {
  absl::StatusOr<skerry::v1::RunSpec> a =
      Prepare("strategy { ga { population_size: 12 } }");
  absl::StatusOr<skerry::v1::RunSpec> b = Prepare("ga { population_size: 12 }");
  ASSERT_TRUE(a.ok()) << a.status();
  ASSERT_TRUE(b.ok()) << b.status();
  EXPECT_EQ(a->SerializeAsString(), b->SerializeAsString());
  EXPECT_EQ(StrategyOf(*a), StrategyKind::kGa);
}

// Defaults: lambda = 4 + floor(3 ln 10) = 10 (Hansen 2016, Table 1); sigma =
// 0.3 x the initial range's width, here sphere's [-5.12, 5.12] (Jamil & Yang
// 2013): 0.3 x 10.24 = 3.072.
TEST(StrategySpecTest, CmaDefaultsFollowTheTutorial) {
  absl::StatusOr<skerry::v1::RunSpec> spec = Prepare("strategy { cma_es { } }");
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(StrategyOf(*spec), StrategyKind::kCmaEs);
  EXPECT_EQ(spec->strategy().cma_es().population_size(), 10u);
  EXPECT_DOUBLE_EQ(spec->strategy().cma_es().sigma(), 3.072);
  // The samples and the generation's distribution genome.
  EXPECT_EQ(IslandPopulation(*spec, 0), 11u);
  EXPECT_FALSE(spec->has_ga());
  EXPECT_EQ(DefaultCmaPopulation(1), 4u);
  EXPECT_EQ(DefaultCmaPopulation(100), 17u);  // 4 + floor(13.8155)
}

// Defaults: 2 x (4 + floor(3 ln 10)) = 20 samples, 10 mirrored pairs; sigma
// 0.02 and learning rate 0.01 of sphere's initial width 10.24 (Jamil & Yang
// 2013); Adam's beta1 0.9, beta2 0.999, epsilon 1e-8 (Kingma & Ba 2014,
// Algorithm 1); no weight decay.
TEST(StrategySpecTest, NaturalEsDefaults) {
  absl::StatusOr<skerry::v1::RunSpec> spec =
      Prepare("strategy { natural_es { } }");
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(StrategyOf(*spec), StrategyKind::kNaturalEs);
  const skerry::v1::NaturalEsSpec& es = spec->strategy().natural_es();
  EXPECT_EQ(es.population_size(), 20u);
  EXPECT_DOUBLE_EQ(es.sigma(), 0.2048);
  EXPECT_DOUBLE_EQ(es.learning_rate(), 0.1024);
  EXPECT_EQ(es.beta1(), 0.9);
  EXPECT_EQ(es.beta2(), 0.999);
  EXPECT_EQ(es.epsilon(), 1e-8);
  EXPECT_EQ(es.weight_decay(), 0.0);
  EXPECT_EQ(IslandPopulation(*spec, 0), 21u);
  EXPECT_FALSE(spec->has_ga());
  // Set values stay; beta1 0 (no momentum) is allowed.
  absl::StatusOr<skerry::v1::RunSpec> set = Prepare(
      "strategy { natural_es { population_size: 2 sigma: 0.5 beta1: 0 } }");
  ASSERT_TRUE(set.ok()) << set.status();
  EXPECT_EQ(set->strategy().natural_es().population_size(), 2u);
  EXPECT_EQ(set->strategy().natural_es().sigma(), 0.5);
  EXPECT_EQ(set->strategy().natural_es().beta1(), 0.0);
}

// strategy.distribution_genomes: on by default for the evolution
// strategies, refused for the GA, and kept off for a run stored before it
// existed (KeepGenomeLayout), so its forks and extensions have its shape.
TEST(StrategySpecTest, DistributionGenomesDefaultOnAndOldRunsKeepTheirShape) {
  for (const std::string kind : {"cma_es", "sep_cma_es", "natural_es"}) {
    SCOPED_TRACE(kind);
    absl::StatusOr<skerry::v1::RunSpec> on =
        Prepare("strategy { " + kind + " { } }");
    ASSERT_TRUE(on.ok()) << on.status();
    EXPECT_TRUE(on->strategy().has_distribution_genomes());
    EXPECT_TRUE(HasDistributionGenomes(*on));
    EXPECT_EQ(IslandPopulation(*on, 0), EsPopulation(*on) + 1);
    absl::StatusOr<skerry::v1::RunSpec> off =
        Prepare("strategy { " + kind + " { } distribution_genomes: false }");
    ASSERT_TRUE(off.ok()) << off.status();
    EXPECT_FALSE(HasDistributionGenomes(*off));
    EXPECT_EQ(IslandPopulation(*off, 0), EsPopulation(*off));

    // A stored spec from before the field: prepared again (a fork's merge,
    // an extension), it stays without distribution genomes.
    skerry::v1::RunSpec stored = *on;
    stored.mutable_strategy()->clear_distribution_genomes();
    skerry::v1::RunSpec again = stored;
    KeepGenomeLayout(stored, &again);
    absl::StatusOr<skerry::v1::RunSpec> prepared = PrepareSpec(again);
    ASSERT_TRUE(prepared.ok()) << prepared.status();
    EXPECT_FALSE(HasDistributionGenomes(*prepared));
    // A stored spec that has it keeps what it says.
    again = *on;
    KeepGenomeLayout(*on, &again);
    EXPECT_TRUE(HasDistributionGenomes(again));
  }
  for (const std::string ga :
       {"distribution_genomes: true", "ga { } distribution_genomes: false"}) {
    absl::StatusOr<skerry::v1::RunSpec> refused =
        Prepare("strategy { " + ga + " }");
    ASSERT_FALSE(refused.ok()) << ga;
    EXPECT_THAT(refused.status().message(),
                HasSubstr("strategy.distribution_genomes: for the evolution "
                          "strategies"));
  }
}

TEST(StrategySpecTest, BadCombinationsNameTheField) {
  struct Case {
    std::string extra;
    std::string message;
    bool noisy = false;
  };
  const Case cases[] = {
      {"ga { population_size: 10 } strategy { ga { population_size: 12 } }",
       "strategy.ga: the GA is set twice"},
      {"ga { population_size: 10 } strategy { cma_es { } }",
       "ga: set beside strategy.cma_es"},
      {"strategy { sep_cma_es { population_size: 3 } }",
       "strategy.sep_cma_es.population_size: out of range"},
      {"strategy { cma_es { sigma: -1 } }", "strategy.cma_es.sigma"},
      {"strategy { cma_es { } } islands { count: 2 population_sizes: [8, 9] }",
       "islands.population_sizes: per-island sizes are for the GA"},
      {"strategy { cma_es { } }", "evaluator.noisy", true},
      {"strategy { natural_es { } }", "evaluator.noisy", true},
      {"ga { population_size: 10 } strategy { natural_es { } }",
       "ga: set beside strategy.natural_es"},
      {"strategy { natural_es { population_size: 7 } }",
       "strategy.natural_es.population_size: must be even"},
      {"strategy { natural_es { population_size: 200000 } }",
       "strategy.natural_es.population_size: out of range"},
      {"strategy { natural_es { sigma: 0 } }",
       "strategy.natural_es.sigma: out of range (allowed: (0, "},
      {"strategy { natural_es { learning_rate: -0.1 } }",
       "strategy.natural_es.learning_rate: out of range"},
      {"strategy { natural_es { beta1: 1 } }",
       "strategy.natural_es.beta1: out of range (allowed: [0, 1); got 1)"},
      {"strategy { natural_es { beta2: -0.5 } }",
       "strategy.natural_es.beta2: out of range"},
      {"strategy { natural_es { epsilon: 0 } }",
       "strategy.natural_es.epsilon: out of range"},
      {"strategy { natural_es { weight_decay: -1 } }",
       "strategy.natural_es.weight_decay: out of range"},
      {"strategy { natural_es { } } islands { count: 2 population_sizes: [8, "
       "8] }",
       "islands.population_sizes: per-island sizes are for the GA; set "
       "strategy.natural_es.population_size"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.extra);
    absl::StatusOr<skerry::v1::RunSpec> spec = Prepare(c.extra, c.noisy);
    ASSERT_FALSE(spec.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(spec.status()));
    EXPECT_THAT(spec.status().message(), HasSubstr(c.message));
  }
}

// Full CMA-ES keeps n x n matrices: a genome too long for them is refused,
// pointing to the separable variant, which accepts it.
TEST(StrategySpecTest, FullCmaRefusesAGenomeTooLongForItsMatrices) {
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(
      "genome_length: 9000 evaluator { builtin { function: "
      "\"sphere\" } } strategy { cma_es { } }",
      "long.spec");
  ASSERT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<skerry::v1::RunSpec> full = PrepareSpec(*spec);
  EXPECT_TRUE(absl::IsInvalidArgument(full.status()));
  EXPECT_THAT(full.status().message(),
              HasSubstr("strategy.cma_es: genome_length 9000 on 1 islands"));
  spec->mutable_strategy()->mutable_sep_cma_es();
  EXPECT_TRUE(PrepareSpec(*spec).ok());
}

}  // namespace
}  // namespace skerry
