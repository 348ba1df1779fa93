// Seed series, extension and comparison with real processes: a coordinator
// binary on a loopback port with a SQLite file in a temporary folder, worker
// processes, and the `skerry` CLI.
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_replace.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/e2e/e2e_fleet.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestIn;
using ::testing::HasSubstr;
using ::testing::Not;
using testing::RunCommand;

// Two islands with migration every 3 generations, so that an extension must
// carry migration on exactly as an uninterrupted run does. MUTATION_RATE and
// GENERATIONS are replaced per test.
constexpr char kSpec[] = R"(
name: "ring-sphere"
seed: 11
genome_length: 4
evaluator { builtin { function: "rastrigin" } }
ga {
  population_size: 12
  selection { method: TOURNAMENT tournament_size: 2 }
  mutation { rate: MUTATION_RATE step: 0.5 }
  elites: 1
}
islands { count: 2 topology: RING interval: 3 migrants: 1 }
stop { max_generations: GENERATIONS }
)";

std::string Spec(const std::string& rate, int generations) {
  return absl::StrReplaceAll(
      kSpec,
      {{"MUTATION_RATE", rate}, {"GENERATIONS", absl::StrCat(generations)}});
}

class SeriesTest : public ::testing::Test {
 protected:
  void SetUp() override { ASSERT_TRUE(fleet_.ok()); }

  CommandResult Cli(std::vector<std::string> args) {
    return fleet_.Cli(args, absl::Seconds(120));
  }

  std::string WriteSpec(const std::string& name, const std::string& text) {
    const std::string path = dir_.File(name);
    EXPECT_TRUE(testing::WriteTextFile(path, text));
    return path;
  }

  void StartWorkers(int n) { ASSERT_TRUE(fleet_.AddWorkers(n, 2)); }

  // Follows the run to its end; returns its digest.
  std::string Finish(int run) {
    CommandResult watch = Cli({"watch", absl::StrCat(run)});
    EXPECT_EQ(watch.exit_code, 0) << watch.output;
    return fleet_.Digest(run);
  }

  testing::TempDir dir_;
  testing::LoopbackFleet fleet_{dir_, "series.db"};
  const std::string& db_ = fleet_.db();
};

TEST_F(SeriesTest, SeriesIsSubmittedAtomicallyListedSteeredAndChecked) {
  const std::string spec = WriteSpec("low.spec", Spec("0.1", 8));
  CommandResult low =
      Cli({"submit", spec, "--seeds", "1-3,7", "--series", "low-rate"});
  ASSERT_EQ(low.exit_code, 0) << low.output;
  EXPECT_THAT(low.output, HasSubstr("series low-rate: 4 runs"));
  EXPECT_THAT(low.output, HasSubstr("4     7"));  // run 4 has seed 7

  // The default name is the spec's; a second series gets "-2".
  CommandResult dflt = Cli({"submit", spec, "--seeds", "1"});
  ASSERT_EQ(dflt.exit_code, 0) << dflt.output;
  EXPECT_THAT(dflt.output, HasSubstr("series ring-sphere: 1 run"));
  CommandResult dflt2 = Cli({"submit", spec, "--seeds", "2"});
  EXPECT_THAT(dflt2.output, HasSubstr("series ring-sphere-2: 1 run"));

  // Bad input names the option and stores nothing.
  struct Bad {
    std::vector<std::string> extra;
    int code;
    std::string says;
  } bad[] = {
      {{"--seeds", "5-1"}, 2, "--seeds: '5-1' runs backwards"},
      {{"--seeds", "1-500"}, 2, "more than 100 seeds"},
      {{"--seeds", "1,x"}, 2, "--seeds: 'x' is not a seed"},
      {{"--seeds", "1,1"}, 2, "repeats seed 1"},
      {{"--seeds", "1", "--series", "low-rate"}, 1, "exists already"},
      {{"--seeds", "1", "--series", "has space"}, 1, "series name: 1 to 64"},
      {{"--series", "alone"}, 2, "goes with --seeds"},
  };
  for (const Bad& b : bad) {
    std::vector<std::string> args = {"submit", spec};
    args.insert(args.end(), b.extra.begin(), b.extra.end());
    CommandResult r = Cli(args);
    SCOPED_TRACE(r.output);
    EXPECT_EQ(r.exit_code, b.code);
    EXPECT_THAT(r.output, HasSubstr(b.says));
  }
  CommandResult list = Cli({"list"});
  ASSERT_EQ(list.exit_code, 0) << list.output;
  EXPECT_THAT(list.output, HasSubstr("series low-rate (4 runs)"));
  EXPECT_THAT(list.output, HasSubstr("series ring-sphere-2 (1 run)"));
  // The refused series made no run: runs 1 to 6 are all there is.
  CommandResult seventh = Cli({"show", "7"});
  EXPECT_EQ(seventh.exit_code, 1) << seventh.output;
  EXPECT_THAT(seventh.output, HasSubstr("7"));

  CommandResult pause = Cli({"series", "pause", "low-rate"});
  ASSERT_EQ(pause.exit_code, 0) << pause.output;
  EXPECT_THAT(pause.output, HasSubstr("series low-rate: 4 runs paused"));
  EXPECT_THAT(Cli({"show", "3"}).output, HasSubstr("paused"));
  EXPECT_THAT(Cli({"show", "5"}).output, Not(HasSubstr("paused")));
  CommandResult resume = Cli({"series", "resume", "low-rate"});
  EXPECT_THAT(resume.output, HasSubstr("4 runs resumed"));
  CommandResult stop = Cli({"series", "stop", "ring-sphere"});
  EXPECT_THAT(stop.output, HasSubstr("series ring-sphere: 1 run stopped"));
  CommandResult again = Cli({"series", "stop", "ring-sphere"});
  EXPECT_THAT(again.output, HasSubstr("1 left as they were"));
  CommandResult missing = Cli({"series", "pause", "nope"});
  EXPECT_EQ(missing.exit_code, 1);
  EXPECT_THAT(missing.output, HasSubstr("no series named 'nope'"));
  CommandResult series = Cli({"series"});
  EXPECT_THAT(series.output, HasSubstr("low-rate"));
  EXPECT_THAT(series.output, HasSubstr("1 stopped"));

  StartWorkers(2);
  for (int run = 1; run <= 4; ++run) Finish(run);
  // The series' rows pass --check (checksums, members' runs exist).
  CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_}, absl::Seconds(60));
  EXPECT_EQ(check.exit_code, 0) << check.output;
  EXPECT_THAT(check.output, HasSubstr("invariants: ok"));
}

TEST_F(SeriesTest, TwoSeriesAreComparedWithARankSumTest) {
  const std::string low = WriteSpec("low.spec", Spec("0.05", 10));
  const std::string high = WriteSpec("high.spec", Spec("0.6", 10));
  ASSERT_EQ(Cli({"submit", low, "--seeds", "1-5", "--series", "low"}).exit_code,
            0);
  ASSERT_EQ(
      Cli({"submit", high, "--seeds", "1-5", "--series", "high"}).exit_code, 0);
  StartWorkers(2);
  for (int run = 1; run <= 10; ++run) Finish(run);
  CommandResult cmp =
      Cli({"compare", "low", "high", "--at", "100,200", "--target", "5"});
  ASSERT_EQ(cmp.exit_code, 0) << cmp.output;
  EXPECT_THAT(cmp.output, HasSubstr("A  series low: 5 runs (1 to 5)"));
  EXPECT_THAT(cmp.output, HasSubstr("B  series high: 5 runs (6 to 10)"));
  EXPECT_THAT(cmp.output, HasSubstr("success at target 5"));
  EXPECT_THAT(cmp.output, HasSubstr("Mann-Whitney U rank-sum test"));
  EXPECT_THAT(cmp.output, HasSubstr("n = 5 and 5, p = "));
  // Five seeds a side, real-valued scores: no ties, so the exact p-value.
  EXPECT_THAT(cmp.output, HasSubstr("exact (no ties)"));
  // A run and a series; one run alone is a group too.
  CommandResult mixed = Cli({"compare", "1", "high"});
  EXPECT_EQ(mixed.exit_code, 0) << mixed.output;
  EXPECT_THAT(mixed.output, HasSubstr("A  run 1: 1 run"));
  CommandResult bad = Cli({"compare", "low", "--at", "200,100"});
  EXPECT_EQ(bad.exit_code, 2);
  EXPECT_THAT(bad.output, HasSubstr("--at: checkpoints go in increasing"));
  CommandResult unknown = Cli({"compare", "nope"});
  EXPECT_EQ(unknown.exit_code, 1);
  EXPECT_THAT(unknown.output, HasSubstr("no series named 'nope'"));
}

// The extended run's genomes equal those of a run given the larger limit
// from the start: same digest, over the shared part and the whole run, for
// a finished run and for a run stopped before it made anything.
TEST_F(SeriesTest, ExtendedRunEqualsLongerRunFromTheStart) {
  const std::string short_spec = WriteSpec("short.spec", Spec("0.3", 7));
  const std::string long_spec = WriteSpec("long.spec", Spec("0.3", 16));
  ASSERT_EQ(Cli({"submit", short_spec}).exit_code, 0);  // run 1
  ASSERT_EQ(Cli({"submit", short_spec}).exit_code, 0);  // run 2: stopped
  CommandResult stop = Cli({"stop", "2"});
  ASSERT_EQ(stop.exit_code, 0) << stop.output;
  // Not ended yet: no extension.
  ASSERT_EQ(Cli({"submit", short_spec}).exit_code, 0);  // run 3
  CommandResult early = Cli({"extend", "3", "--generations", "16"});
  EXPECT_EQ(early.exit_code, 1);
  EXPECT_THAT(early.output, HasSubstr("only a FINISHED or STOPPED run"));
  ASSERT_EQ(Cli({"stop", "3"}).exit_code, 0);

  StartWorkers(2);
  const std::string short_digest = Finish(1);
  ASSERT_EQ(short_digest.size(), 64u);

  // Lowering or leaving nothing to raise is refused, and changes nothing.
  CommandResult lower = Cli({"extend", "1", "--generations", "5"});
  EXPECT_EQ(lower.exit_code, 1);
  EXPECT_THAT(lower.output, HasSubstr("below the run's 7"));
  CommandResult none = Cli({"extend", "1"});
  EXPECT_EQ(none.exit_code, 2);
  EXPECT_THAT(none.output, HasSubstr("give at least one of"));
  CommandResult no_target = Cli({"extend", "1", "--target", "0.5"});
  EXPECT_EQ(no_target.exit_code, 1);
  EXPECT_THAT(no_target.output, HasSubstr("the run has no target"));
  EXPECT_EQ(DigestIn(Cli({"digest", "1"}).output), short_digest);

  CommandResult extend = Cli({"extend", "1", "--generations", "16"});
  ASSERT_EQ(extend.exit_code, 0) << extend.output;
  EXPECT_THAT(extend.output, HasSubstr("run 1 running again"));
  const std::string extended = Finish(1);
  ASSERT_EQ(Cli({"extend", "2", "--generations", "16"}).exit_code, 0);
  const std::string from_stop = Finish(2);

  ASSERT_EQ(Cli({"submit", long_spec}).exit_code, 0);  // run 4
  const std::string whole = Finish(4);
  ASSERT_EQ(whole.size(), 64u);
  EXPECT_EQ(extended, whole);
  EXPECT_EQ(from_stop, whole);
  EXPECT_NE(short_digest, whole);
  // The shared part: a fresh short run has the extended run's first digest.
  ASSERT_EQ(Cli({"submit", short_spec}).exit_code, 0);  // run 5
  EXPECT_EQ(Finish(5), short_digest);

  CommandResult show = Cli({"show", "1"});
  EXPECT_THAT(show.output, HasSubstr("generation limit (16) reached"));
  // Each extension is in the audit log, with what it raised.
  CommandResult audit = Cli({"audit"});
  ASSERT_EQ(audit.exit_code, 0) << audit.output;
  EXPECT_THAT(audit.output, HasSubstr("extended to max_generations 16"));
  CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_}, absl::Seconds(60));
  EXPECT_EQ(check.exit_code, 0) << check.output;
}

// The other stop rules: a target moved further and a larger evaluation
// budget, on two islands (where the target rule makes a faster island's
// generations past the stop generation be discarded at the first finish).
TEST_F(SeriesTest, ExtendedTargetAndBudgetEqualRunsGivenThemFromTheStart) {
  const std::string base = R"(
name: "sphere-two-islands"
seed: 5
genome_length: 4
evaluator { builtin { function: "sphere" } }
ga { population_size: 10 mutation { rate: 0.3 step: 0.3 } elites: 1 }
islands { count: 2 topology: RING interval: 2 migrants: 1 }
)";
  const std::string near = WriteSpec(
      "near.spec", base + "stop { target_score: 1.0 max_generations: 80 }");
  const std::string far = WriteSpec(
      "far.spec", base + "stop { target_score: 0.01 max_generations: 80 }");
  const std::string small =
      WriteSpec("small.spec", base + "stop { max_evaluations: 150 }");
  const std::string large =
      WriteSpec("large.spec", base + "stop { max_evaluations: 600 }");
  for (const std::string& spec : {near, small, far, large}) {
    ASSERT_EQ(Cli({"submit", spec}).exit_code, 0);  // runs 1 to 4
  }
  StartWorkers(2);
  const std::string near_digest = Finish(1);
  const std::string small_digest = Finish(2);
  CommandResult wrong_way = Cli({"extend", "1", "--target", "2"});
  EXPECT_EQ(wrong_way.exit_code, 1);
  EXPECT_THAT(wrong_way.output, HasSubstr("minimising: it may only go down"));
  ASSERT_EQ(Cli({"extend", "1", "--target", "0.01"}).exit_code, 0);
  ASSERT_EQ(Cli({"extend", "2", "--evaluations", "600"}).exit_code, 0);
  const std::string far_digest = Finish(3);
  const std::string large_digest = Finish(4);
  EXPECT_EQ(Finish(1), far_digest);
  EXPECT_EQ(Finish(2), large_digest);
  EXPECT_NE(near_digest, far_digest);
  EXPECT_NE(small_digest, large_digest);
  EXPECT_THAT(Cli({"show", "1"}).output, HasSubstr("target score reached"));
  EXPECT_THAT(Cli({"show", "2"}).output,
              HasSubstr("evaluation budget (600) reached"));
}

// The evolution strategies extend as the GA does: a CMA-ES run ended by its
// target on two migrating islands (where a faster island's generations past
// the stop generation, if any, are trimmed and its distribution rebuilt by
// replay; engine_strategy_series_test.cc forces that case) and a natural ES
// run ended by its generation limit, each extended, equal runs given the
// raised rule from the start.
TEST_F(SeriesTest, ExtendedCmaEsRunEqualsLongerRunFromTheStart) {
  const std::string cma = R"(
name: "cma-two-islands"
seed: 8
genome_length: 4
evaluator { builtin { function: "sphere" } }
strategy { cma_es { } }
islands { count: 2 topology: RING interval: 2 migrants: 1 }
)";
  const std::string natural = R"(
name: "natural-es-two-islands"
seed: 9
genome_length: 4
evaluator { builtin { function: "sphere" } }
strategy { natural_es { population_size: 6 } }
islands { count: 2 topology: RING interval: 3 migrants: 1 }
)";
  const std::string near = WriteSpec(
      "near.spec", cma + "stop { target_score: 0.5 max_generations: 60 }");
  const std::string short_es =
      WriteSpec("short.spec", natural + "stop { max_generations: 5 }");
  const std::string far = WriteSpec(
      "far.spec", cma + "stop { target_score: 1e-6 max_generations: 60 }");
  const std::string long_es =
      WriteSpec("long.spec", natural + "stop { max_generations: 12 }");
  for (const std::string& spec : {near, short_es, far, long_es}) {
    ASSERT_EQ(Cli({"submit", spec}).exit_code, 0);  // runs 1 to 4
  }
  StartWorkers(2);
  const std::string near_digest = Finish(1);
  const std::string short_digest = Finish(2);
  CommandResult extend = Cli({"extend", "1", "--target", "1e-6"});
  ASSERT_EQ(extend.exit_code, 0) << extend.output;
  EXPECT_THAT(extend.output, HasSubstr("run 1 running again"));
  ASSERT_EQ(Cli({"extend", "2", "--generations", "12"}).exit_code, 0);
  const std::string far_digest = Finish(3);
  const std::string long_digest = Finish(4);
  EXPECT_EQ(Finish(1), far_digest);
  EXPECT_EQ(Finish(2), long_digest);
  EXPECT_NE(near_digest, far_digest);
  EXPECT_NE(short_digest, long_digest);
  CommandResult check =
      RunCommand({SKERRY_COORDINATOR_BIN, "--check", db_}, absl::Seconds(60));
  EXPECT_EQ(check.exit_code, 0) << check.output;
}

}  // namespace
}  // namespace skerry
