// ReplayStrategyStates (server/engine/strategy_replay.h) against a store
// whose CMA-ES run was driven here as the engine drives it: the replayed
// state at a generation equals the state the strategy had when it produced
// it, and a stored genome that the replay does not reproduce is an error
// naming its run, island, generation and slot.
#include "server/engine/strategy_replay.h"

#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/strategy.h"
#include "server/store/store.h"
#include "tests/support/process.h"

namespace skerry::engine {
namespace {

using store::GenomeRecord;
using ::testing::HasSubstr;

skerry::v1::RunSpec CmaSpec() {
  absl::StatusOr<skerry::v1::RunSpec> spec = ParseSpecText(R"(
name: "replayed"
seed: 808
genome_length: 3
evaluator { builtin { function: "sphere" } }
strategy { cma_es { } }
stop { max_generations: 20 }
)",
                                                           "spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<skerry::v1::RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

class StrategyReplayTest : public ::testing::Test {
 protected:
  // Stores generations 0..last of a one-island CMA-ES run, every one but
  // the last evaluated (sphere: Jamil & Yang 2013, see REFERENCES.md);
  // states_[g] is the strategy's state when it produced generation g.
  void DriveRun(uint32_t last) {
    absl::StatusOr<std::unique_ptr<store::Store>> s =
        store::Store::Open(dir_.File("replay.db"));
    ASSERT_TRUE(s.ok()) << s.status();
    store_ = *std::move(s);
    run_.name = "replayed";
    run_.owner = "local";
    run_.spec = CmaSpec();
    run_.state = skerry::v1::RUNNING;
    absl::StatusOr<std::unique_ptr<Strategy>> strategy =
        MakeStrategy(run_.spec, 0);
    ASSERT_TRUE(strategy.ok()) << strategy.status();
    absl::StatusOr<std::vector<GenomeRecord>> gen0 = (*strategy)->Start();
    ASSERT_TRUE(gen0.ok()) << gen0.status();
    states_.push_back((*strategy)->Save().SerializeAsString());
    const std::vector<std::string> first = {states_.back()};
    ASSERT_TRUE(store_->runs().CreateRun(&run_, &*gen0, &first).ok());
    for (uint32_t g = 0; g < last; ++g) {
      absl::StatusOr<std::vector<GenomeRecord>> current =
          store_->genomes().GetGeneration(run_.id, 0, g);
      ASSERT_TRUE(current.ok()) << current.status();
      std::vector<store::ResultUpdate> results;
      for (const GenomeRecord& r : *current) {
        store::ResultUpdate u;
        u.genome_id = r.id;
        u.run_id = run_.id;
        u.attempts = 1;
        for (double x : r.genes) u.score += x * x;
        results.push_back(u);
      }
      ASSERT_TRUE(store_->genomes().CommitResults(results).ok());
      current = store_->genomes().GetGeneration(run_.id, 0, g);
      ASSERT_TRUE(current.ok()) << current.status();
      ASSERT_TRUE((*strategy)->Tell(*current, {}).ok());
      absl::StatusOr<std::vector<GenomeRecord>> next = (*strategy)->Ask();
      ASSERT_TRUE(next.ok()) << next.status();
      for (GenomeRecord& n : *next) n.run_id = run_.id;
      states_.push_back((*strategy)->Save().SerializeAsString());
      store::GenerationCommit c;
      c.run_id = run_.id;
      c.completed.run_id = run_.id;
      c.completed.generation = g;
      c.next = &*next;
      c.strategy_state = states_.back();
      ASSERT_TRUE(store_->runs().CommitGeneration(c).ok());
    }
  }

  testing::TempDir dir_;
  std::unique_ptr<store::Store> store_;
  store::RunRecord run_;
  std::vector<std::string> states_;
};

TEST_F(StrategyReplayTest, ReplayedStateIsTheOneThatProducedTheGeneration) {
  DriveRun(8);
  for (uint32_t g : {0u, 1u, 5u, 8u}) {
    SCOPED_TRACE(g);
    absl::StatusOr<std::vector<skerry::v1::StrategyState>> replayed =
        ReplayStrategyStates(*store_, run_, g);
    ASSERT_TRUE(replayed.ok()) << replayed.status();
    ASSERT_EQ(replayed->size(), 1u);
    EXPECT_EQ((*replayed)[0].SerializeAsString(), states_[g]);
    EXPECT_EQ((*replayed)[0].generation(), g);
  }
}

// Replayed from a spec the run was not made with (another seed), the first
// sample differs from the stored one: the error names where, and no state
// is returned.
TEST_F(StrategyReplayTest, AStoredGenomeTheReplayDoesNotGiveIsNamed) {
  DriveRun(3);
  store::RunRecord other = run_;
  other.spec.set_seed(run_.spec.seed() + 1);
  absl::StatusOr<std::vector<skerry::v1::StrategyState>> replayed =
      ReplayStrategyStates(*store_, other, 3);
  ASSERT_FALSE(replayed.ok());
  EXPECT_TRUE(absl::IsFailedPrecondition(replayed.status()))
      << replayed.status();
  EXPECT_THAT(std::string(replayed.status().message()),
              HasSubstr(absl::StrCat("run ", run_.id,
                                     " island 0 generation 0 slot 0")));
  EXPECT_THAT(std::string(replayed.status().message()),
              HasSubstr("its genes differ"));
}

// Asynchronous islands migrate by timing: their runs cannot be replayed.
TEST_F(StrategyReplayTest, AsynchronousIslandsAreRefusedNamingTheField) {
  DriveRun(1);
  store::RunRecord other = run_;
  other.spec.mutable_islands()->set_count(2);
  other.spec.mutable_islands()->set_asynchronous(true);
  absl::StatusOr<std::vector<skerry::v1::StrategyState>> replayed =
      ReplayStrategyStates(*store_, other, 1);
  EXPECT_TRUE(absl::IsFailedPrecondition(replayed.status()))
      << replayed.status();
  EXPECT_THAT(std::string(replayed.status().message()),
              HasSubstr("islands.asynchronous"));
}

}  // namespace
}  // namespace skerry::engine
