// The store tests' fixture: a fresh store in a temporary folder, a small run
// spec, and helpers that create runs and evaluate genomes.
#ifndef SKERRY_TESTS_UNIT_SERVER_STORE_FIXTURE_H_
#define SKERRY_TESTS_UNIT_SERVER_STORE_FIXTURE_H_

#include <memory>
#include <string>
#include <vector>

#include "common/spec.h"
#include "gtest/gtest.h"
#include "server/store/store.h"
#include "tests/support/process.h"

namespace skerry::store {

using skerry::testing::TempDir;
using skerry::v1::RunSpec;

// A small valid spec: sphere in 2 dimensions, 2 islands of 4.
inline RunSpec SmallSpec(uint32_t islands = 2) {
  RunSpec spec;
  spec.set_name("store-test");
  spec.set_seed(11);
  spec.set_genome_length(2);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(4);
  spec.mutable_islands()->set_count(islands);
  spec.mutable_stop()->set_max_generations(5);
  absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : spec;
}

inline GenomeRecord MakeGenome(uint32_t island, uint32_t generation,
                               uint32_t slot, double gene) {
  GenomeRecord g;
  g.island = island;
  g.generation = generation;
  g.slot = slot;
  g.origin = generation == 0 ? skerry::v1::SEEDED : skerry::v1::MUTATION;
  g.genes = {gene, -gene};
  g.state = skerry::v1::PENDING;
  return g;
}

// Generation 0 of every island, `per_island` genomes each.
inline std::vector<GenomeRecord> Generation0(uint32_t islands,
                                             uint32_t per_island) {
  std::vector<GenomeRecord> out;
  for (uint32_t i = 0; i < islands; ++i) {
    for (uint32_t s = 0; s < per_island; ++s) {
      out.push_back(MakeGenome(i, 0, s, 0.5 * s + i));
    }
  }
  return out;
}

inline RunRecord MakeRun(const RunSpec& spec) {
  RunRecord run;
  run.name = spec.name();
  run.owner = "alice";
  run.spec = spec;
  run.spec_text = "name: \"store-test\"";
  run.state = skerry::v1::RUNNING;
  run.created_ms = run.updated_ms = 1000;
  return run;
}

class StoreTest : public ::testing::Test {
 protected:
  void SetUp() override {
    absl::StatusOr<std::unique_ptr<Store>> store = Store::Open(path());
    ASSERT_TRUE(store.ok()) << store.status();
    store_ = std::move(*store);
  }

  std::string path() const { return dir_.File("skerry.db"); }

  // Creates a run with `islands` islands of 4 seeded genomes.
  RunRecord CreateRun(uint32_t islands, std::vector<GenomeRecord>* genomes) {
    RunRecord run = MakeRun(SmallSpec(islands));
    *genomes = Generation0(islands, 4);
    absl::Status s = store_->runs().CreateRun(&run, genomes);
    EXPECT_TRUE(s.ok()) << s;
    return run;
  }

  // Marks every genome of `genomes` evaluated with the given scores.
  void Evaluate(const std::vector<GenomeRecord>& genomes,
                const std::vector<double>& scores) {
    std::vector<ResultUpdate> updates;
    for (size_t i = 0; i < genomes.size(); ++i) {
      ResultUpdate u;
      u.genome_id = genomes[i].id;
      u.run_id = genomes[i].run_id;
      u.state = skerry::v1::EVALUATED;
      u.score = scores[i];
      u.attempts = 1;
      updates.push_back(u);
    }
    absl::Status s = store_->genomes().CommitResults(updates);
    ASSERT_TRUE(s.ok()) << s;
  }

  TempDir dir_;
  std::unique_ptr<Store> store_;
};

}  // namespace skerry::store

#endif  // SKERRY_TESTS_UNIT_SERVER_STORE_FIXTURE_H_
