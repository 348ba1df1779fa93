// The spec of a fork (server/engine/fork_spec.h): changes merged over the
// parent's spec, the fields a fork may not change, named, and when the copied
// scores are kept.
#include "server/engine/fork_spec.h"

#include <string>

#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using ::testing::HasSubstr;

RunSpec Parent() {
  absl::StatusOr<RunSpec> spec = ParseSpecText(R"(
name: "parent"
seed: 5
genome_length: 6
evaluator { builtin { function: "sphere" } }
ga { population_size: 20 mutation { rate: 0.2 step: 0.5 } immigrants: 2 }
islands { count: 3 }
stop { max_generations: 40 }
)",
                                               "parent");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

RunSpec Forked(const std::string& changes) {
  absl::StatusOr<RunSpec> merged = MergeForkChanges(Parent(), changes);
  EXPECT_TRUE(merged.ok()) << merged.status();
  absl::StatusOr<RunSpec> prepared = PrepareSpec(*merged);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

TEST(ForkSpecTest, ChangesAreMergedOverTheParentAndZerosWin) {
  const RunSpec fork =
      Forked("ga { mutation { rate: 0.05 } immigrants: 0 } name: \"hot\"");
  EXPECT_EQ(fork.name(), "hot");
  EXPECT_DOUBLE_EQ(fork.ga().mutation().rate(), 0.05);
  EXPECT_DOUBLE_EQ(fork.ga().mutation().step(), 0.5);  // kept
  EXPECT_EQ(fork.ga().immigrants(), 0u);               // a zero written wins
  EXPECT_EQ(fork.ga().population_size(), 20u);
  EXPECT_EQ(fork.stop().max_generations(), 40u);
  EXPECT_TRUE(CheckForkChanges(Parent(), fork, 10).ok());
}

TEST(ForkSpecTest, NoChangesGiveTheParentsSpec) {
  const RunSpec fork = Forked("");
  EXPECT_EQ(fork.SerializeAsString(), Parent().SerializeAsString());
  EXPECT_TRUE(ForkKeepsScores(Parent(), fork));
}

TEST(ForkSpecTest, ASyntaxErrorPointsIntoTheChanges) {
  absl::StatusOr<RunSpec> merged = MergeForkChanges(Parent(), "ga {\n  x: 1");
  ASSERT_FALSE(merged.ok());
  EXPECT_THAT(merged.status().message(), HasSubstr("changes:2:3"));
}

TEST(ForkSpecTest, FieldsThatShapeTheGenomesAreRefusedByName) {
  const struct {
    const char* changes;
    const char* field;
  } cases[] = {
      {"genome_length: 7", "genome_length"},
      {"objective: MAXIMIZE", "objective"},
      {"islands { count: 2 }", "islands.count"},
      {"ga { population_size: 21 }", "ga.population_size"},
      {"islands { population_sizes: [20, 20, 30] }",
       "islands.population_sizes[2]"},
      {"stop { max_generations: 10 }", "stop.max_generations"},
  };
  for (const auto& c : cases) {
    SCOPED_TRACE(c.changes);
    absl::Status s = CheckForkChanges(Parent(), Forked(c.changes), 10);
    EXPECT_TRUE(absl::IsInvalidArgument(s)) << s;
    EXPECT_THAT(s.message(), HasSubstr(c.field));
  }
}

// A CMA-ES run may be forked (its islands' states are replayed to the fork
// generation), but not into another strategy, whose islands could not read
// those states.
TEST(ForkSpecTest, AForkKeepsItsParentsStrategyNamingTheFieldOtherwise) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(R"(
name: "cma-parent"
seed: 5
genome_length: 6
evaluator { builtin { function: "sphere" } }
strategy { cma_es { } }
stop { max_generations: 40 }
)",
                                               "parent");
  ASSERT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<RunSpec> parent = PrepareSpec(*spec);
  ASSERT_TRUE(parent.ok()) << parent.status();
  absl::StatusOr<RunSpec> merged = MergeForkChanges(*parent, "");
  ASSERT_TRUE(merged.ok()) << merged.status();
  EXPECT_TRUE(CheckForkChanges(*parent, *merged, 10).ok());
  absl::StatusOr<RunSpec> sep =
      PrepareSpec(*MergeForkChanges(*parent, "strategy { sep_cma_es { } }"));
  ASSERT_TRUE(sep.ok()) << sep.status();
  absl::Status s = CheckForkChanges(*parent, *sep, 10);
  EXPECT_TRUE(absl::IsInvalidArgument(s)) << s;
  EXPECT_THAT(s.message(), HasSubstr("strategy: a fork may not change it"));
  EXPECT_THAT(s.message(), HasSubstr("cma_es"));
  EXPECT_THAT(s.message(), HasSubstr("sep_cma_es"));
  absl::StatusOr<RunSpec> bigger = PrepareSpec(*MergeForkChanges(
      *parent, "strategy { cma_es { population_size: 30 } }"));
  ASSERT_TRUE(bigger.ok()) << bigger.status();
  s = CheckForkChanges(*parent, *bigger, 10);
  EXPECT_TRUE(absl::IsInvalidArgument(s)) << s;
  EXPECT_THAT(s.message(), HasSubstr("strategy.cma_es.population_size"));
  EXPECT_TRUE(absl::IsInvalidArgument(
      CheckForkChanges(Parent(), *parent, 10)));  // GA into CMA-ES
}

TEST(ForkSpecTest, ScoresAreKeptOnlyWithTheSameEvaluatorAndSeed) {
  EXPECT_TRUE(ForkKeepsScores(Parent(), Forked("ga { elites: 3 }")));
  EXPECT_FALSE(ForkKeepsScores(Parent(), Forked("seed: 6")));
  EXPECT_FALSE(ForkKeepsScores(
      Parent(), Forked("evaluator { builtin { function: \"rastrigin\" } }")));
  EXPECT_FALSE(
      ForkKeepsScores(Parent(), Forked("evaluator { time_limit_seconds: 5 }")));
}

}  // namespace
}  // namespace skerry::engine
