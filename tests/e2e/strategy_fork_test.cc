// Forks of evolution-strategy runs end to end (issue 17): real coordinator,
// real worker processes, a real SQLite file. A CMA-ES island's state at the
// fork generation (CMA-ES, sep-CMA-ES, the natural ES) is rebuilt by
// replaying the parent's stored generations
// (server/engine/strategy_replay.h), so an unchanged fork repeats its parent
// genome for genome from the fork generation on (the digest over the shared
// generations, as fork_test.cc checks for the GA), with islands migrating, a
// fork of a fork too; a fork with a changed field starts from the copied
// generation and goes its own way; `--check` accepts every run.
#include <map>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "tests/e2e/e2e_fleet.h"
#include "tests/e2e/genome_digest.h"
#include "tests/support/db_check.h"
#include "tests/support/process.h"

namespace skerry {
namespace {

using testing::CommandResult;
using testing::DigestFrom;
using ::testing::HasSubstr;
using testing::RunCommand;
using testing::StoredGenome;

// Two islands on a ring migrating every 3 generations: a migrant better
// than a whole generation moves an island's mean, so the replay must choose
// the migrants as the engine did. Population 4 + floor(3 ln 5) = 8.
constexpr char kSpec[] = R"(
name: "es-parent"
seed: 9091
genome_length: 5
evaluator { builtin { function: "rosenbrock" } }
strategy { KIND { } }
islands { count: 2 topology: RING interval: 3 migrants: 1 }
stop { max_generations: 14 }
)";

class StrategyForkTest : public ::testing::Test {
 protected:
  void SetUp() override {
    ASSERT_TRUE(fleet_.ok());
    ASSERT_TRUE(fleet_.AddWorkers(2, 2));
  }

  CommandResult Cli(std::vector<std::string> args) { return fleet_.Cli(args); }

  // The id a submit or fork printed, after following that run to its end.
  int64_t Finished(const CommandResult& made) { return fleet_.Finished(made); }

  int64_t SubmitParent(const std::string& kind) {
    std::string text = kSpec;
    text.replace(text.find("KIND"), 4, kind);
    const std::string spec = dir_.File(kind + ".spec");
    EXPECT_TRUE(testing::WriteTextFile(spec, text));
    return Finished(Cli({"submit", spec}));
  }

  void StopAndCheck() { fleet_.StopAndCheck(); }

  testing::TempDir dir_;
  testing::LoopbackFleet fleet_{dir_, "es-forks.db"};
  const std::string& db_ = fleet_.db();
};

// `child`'s digest from `from` on equals `parent`'s over the same generations.
// `between`: the runs between them (a fork of a fork), whose genomes the
// child's copied generation may name as parents.
void ExpectSameFrom(const std::string& db, int64_t parent_id, int64_t child_id,
                    int from, uint64_t expected_count,
                    const std::vector<int64_t>& between = {}) {
  const std::vector<StoredGenome> parent = testing::ReadGenomes(db, parent_id);
  const std::vector<StoredGenome> child = testing::ReadGenomes(db, child_id);
  std::vector<StoredGenome> all = parent;
  all.insert(all.end(), child.begin(), child.end());
  for (int64_t run : between) {
    const std::vector<StoredGenome> more = testing::ReadGenomes(db, run);
    all.insert(all.end(), more.begin(), more.end());
  }
  uint64_t parent_count = 0;
  uint64_t child_count = 0;
  EXPECT_EQ(DigestFrom(child, all, from, &child_count),
            DigestFrom(parent, all, from, &parent_count));
  EXPECT_EQ(child_count, parent_count);
  EXPECT_EQ(child_count, expected_count);
}

TEST_F(StrategyForkTest,
       UnchangedForksOfEvolutionStrategyRunsRepeatTheirParent) {
  // The natural ES's default population is twice CMA-ES's (16 samples, 8
  // mirrored pairs); its state holds the centre and Adam's moments. Each
  // generation also holds its distribution genome.
  const struct {
    const char* kind;
    uint64_t population;
  } kinds[] = {{"cma_es", 9}, {"sep_cma_es", 9}, {"natural_es", 17}};
  for (const auto& [kind, population] : kinds) {
    SCOPED_TRACE(kind);
    const int64_t parent = SubmitParent(kind);
    // Generation 5 is bred after the epoch of generation 3; 8 follows the
    // epoch of 6 in the fork itself.
    const int64_t fork =
        Finished(Cli({"fork", absl::StrCat(parent), "--at", "5"}));
    ExpectSameFrom(db_, parent, fork, 5, 2u * population * 9u);  // 5-13
    // The copied generation keeps its genes whole, so the fork's rows hold
    // every gene of it without the parent's (a one-run backup of the fork).
    for (const StoredGenome& g : testing::ReadGenomes(db_, fork)) {
      if (g.generation == 5) {
        EXPECT_FALSE(IsRecipe(g.genes))
            << "slot " << g.slot << " island " << g.island;
      }
    }
    // A fork of the fork replays the parent to 5, then the fork to 8.
    const int64_t again =
        Finished(Cli({"fork", absl::StrCat(fork), "--at", "8"}));
    ExpectSameFrom(db_, parent, again, 8, 2u * population * 6u,  // 8-13
                   {fork});
    CommandResult show = Cli({"show", absl::StrCat(again)});
    EXPECT_THAT(show.output, HasSubstr(absl::StrCat("forked from run ", fork,
                                                    " at generation 8")));
  }
  StopAndCheck();
}

TEST_F(StrategyForkTest, ForkWithAChangedFieldStartsFromTheCopyAndGoesItsWay) {
  const int64_t parent = SubmitParent("cma_es");
  const std::string changes = dir_.File("changes.spec");
  ASSERT_TRUE(testing::WriteTextFile(
      changes, "seed: 77\nstop { max_generations: 16 }\n"));
  const int64_t fork = Finished(
      Cli({"fork", absl::StrCat(parent), "--at", "6", "--set-file", changes}));
  const std::vector<StoredGenome> a = testing::ReadGenomes(db_, parent);
  const std::vector<StoredGenome> b = testing::ReadGenomes(db_, fork);
  std::map<int64_t, const StoredGenome*> by_id;
  for (const StoredGenome& g : a) by_id[g.id] = &g;
  for (const StoredGenome& g : b) by_id[g.id] = &g;
  ASSERT_EQ(b.size(), 2u * 9u * 10u);  // generations 6-15, 8 samples + 1
  int same_at_6 = 0;
  int differ_at_7 = 0;
  for (const StoredGenome& g : b) {
    for (const StoredGenome& p : a) {
      if (p.island != g.island || p.generation != g.generation ||
          p.slot != g.slot) {
        continue;
      }
      const bool same =
          testing::GenesBytes(p, by_id) == testing::GenesBytes(g, by_id);
      if (g.generation == 6 && same) ++same_at_6;
      if (g.generation == 7 && !same) ++differ_at_7;
    }
  }
  EXPECT_EQ(same_at_6, 18);  // the copied generation
  // The samples are drawn from the new seed's streams; the distribution
  // genomes are the same mean, updated from the same copied generation.
  EXPECT_EQ(differ_at_7, 16);
  // The strategy may not change.
  CommandResult other = Cli({"fork", absl::StrCat(parent), "--at", "6", "--set",
                             "strategy { sep_cma_es { } }"});
  EXPECT_NE(other.exit_code, 0) << other.output;
  EXPECT_THAT(other.output, HasSubstr("strategy: a fork may not change it"));
  StopAndCheck();
}

}  // namespace
}  // namespace skerry
