// The store's validations (schema version 4): one per genome, copies for
// genomes carried over unchanged, outcomes, restart listing, trimming.
#include <string>
#include <vector>

#include "common/sample_recipe.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/store/store.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using ::testing::HasSubstr;

class StoreValidationTest : public StoreTest {
 protected:
  ValidationRecord Request(
      int64_t genome_id,
      skerry::v1::ValidationReason reason = skerry::v1::REQUESTED) {
    ValidationRequest r;
    r.genome_id = genome_id;
    r.cases = 625;
    r.reason = reason;
    r.requested_by = "bo";
    r.now_ms = 5000;
    absl::StatusOr<ValidationRecord> v =
        store_->validations().RequestValidation(r);
    EXPECT_TRUE(v.ok()) << v.status();
    return v.ok() ? *v : ValidationRecord();
  }

  void Finish(int64_t id, double score) {
    ValidationUpdate u;
    u.id = id;
    u.state = skerry::v1::VALIDATION_DONE;
    u.score = score;
    u.attempts = 1;
    u.now_ms = 6000;
    ASSERT_TRUE(store_->validations().CommitValidations({u}).ok());
  }

  // Generation 1 of island 0: slot 0 an elite of `parent`, slot 1 a mutant.
  std::vector<GenomeRecord> NextGeneration(const RunRecord& run,
                                           const GenomeRecord& parent,
                                           bool validate_elite) {
    std::vector<GenomeRecord> next;
    for (uint32_t s = 0; s < 4; ++s) {
      GenomeRecord g = MakeGenome(0, 1, s, 7.0 + s);
      g.run_id = run.id;
      g.parent_a = parent.id;
      if (s == 0) {
        g.origin = skerry::v1::ELITE;
        g.genes = parent.genes;
      }
      next.push_back(g);
    }
    GenerationCommit c;
    c.run_id = run.id;
    c.island = 0;
    c.completed.run_id = run.id;
    c.completed.island = 0;
    c.completed.generation = 0;
    c.next = &next;
    if (validate_elite) {
      ValidationRequest r;
      r.genome_id = parent.id;
      r.cases = 625;
      r.reason = skerry::v1::GENERATION_CHAMPION;
      r.now_ms = 4000;
      c.validate = r;
    }
    absl::Status s = store_->runs().CommitGeneration(c);
    EXPECT_TRUE(s.ok()) << s;
    return next;
  }
};

TEST_F(StoreValidationTest, ARequestIsStoredOnceAndFoundAgain) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  const ValidationRecord v = Request(genomes[2].id);
  EXPECT_GT(v.id, 0);
  EXPECT_EQ(v.run_id, run.id);
  EXPECT_EQ(v.state, skerry::v1::VALIDATION_PENDING);
  EXPECT_EQ(v.cases, 625u);
  EXPECT_EQ(v.slot, 2u);
  EXPECT_EQ(v.requested_by, "bo");
  EXPECT_EQ(v.training_state, skerry::v1::EVALUATED);
  EXPECT_EQ(v.training_score, 2.0);
  const ValidationRecord again = Request(genomes[2].id);
  EXPECT_EQ(again.id, v.id) << "one validation per genome";

  absl::StatusOr<std::vector<ValidationRecord>> pending =
      store_->validations().PendingValidations();
  ASSERT_TRUE(pending.ok());
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ((*pending)[0].genes, genomes[2].genes) << "genes for the queue";

  Finish(v.id, 612);
  absl::StatusOr<std::optional<ValidationRecord>> got =
      store_->validations().GetValidation(genomes[2].id);
  ASSERT_TRUE(got.ok() && got->has_value());
  EXPECT_EQ((*got)->state, skerry::v1::VALIDATION_DONE);
  EXPECT_EQ((*got)->score, 612);
  EXPECT_EQ((*got)->completed_ms, 6000);
  pending = store_->validations().PendingValidations();
  ASSERT_TRUE(pending.ok());
  EXPECT_TRUE(pending->empty());
  // A second outcome for a finished validation changes nothing.
  Finish(v.id, 1);
  got = store_->validations().GetValidation(genomes[2].id);
  ASSERT_TRUE(got.ok() && got->has_value());
  EXPECT_EQ((*got)->score, 612);
}

TEST_F(StoreValidationTest, UnknownGenomeIsNotFoundAndNothingIsStored) {
  ValidationRequest r;
  r.genome_id = 999;
  absl::StatusOr<ValidationRecord> v =
      store_->validations().RequestValidation(r);
  ASSERT_FALSE(v.ok());
  EXPECT_EQ(v.status().code(), absl::StatusCode::kNotFound);
  EXPECT_THAT(std::string(v.status().message()), HasSubstr("genome 999"));
  absl::StatusOr<std::vector<ValidationRecord>> pending =
      store_->validations().PendingValidations();
  ASSERT_TRUE(pending.ok());
  EXPECT_TRUE(pending->empty());
}

TEST_F(StoreValidationTest, AnEliteOfAValidatedParentGetsACopy) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  // The champion's validation goes in with the generation.
  std::vector<GenomeRecord> next = NextGeneration(run, genomes[3], true);
  absl::StatusOr<std::optional<ValidationRecord>> parent =
      store_->validations().GetValidation(genomes[3].id);
  ASSERT_TRUE(parent.ok() && parent->has_value());
  EXPECT_EQ((*parent)->reason, skerry::v1::GENERATION_CHAMPION);
  EXPECT_EQ((*parent)->state, skerry::v1::VALIDATION_PENDING);

  // While the parent's is pending, the elite needs work of its own...
  const ValidationRecord mutant = Request(next[1].id);
  EXPECT_EQ(mutant.state, skerry::v1::VALIDATION_PENDING);
  EXPECT_EQ(mutant.copied_from, 0);
  // ...once it is done, the elite (same genes) copies it.
  Finish((*parent)->id, 300);
  const ValidationRecord elite = Request(next[0].id);
  EXPECT_EQ(elite.state, skerry::v1::VALIDATION_DONE);
  EXPECT_EQ(elite.score, 300);
  EXPECT_EQ(elite.cases, 625u);
  EXPECT_EQ(elite.copied_from, (*parent)->id);
  EXPECT_EQ(elite.completed_ms, 5000);

  absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>> scores =
      store_->validations().ChampionValidationScores(run.id);
  ASSERT_TRUE(scores.ok());
  ASSERT_EQ(scores->size(), 1u);
  EXPECT_EQ(scores->at({0, 0}), 300);

  absl::StatusOr<std::vector<ValidationRecord>> list =
      store_->validations().ListValidations(run.id, 10);
  ASSERT_TRUE(list.ok());
  ASSERT_EQ(list->size(), 3u);
  EXPECT_EQ((*list)[0].id, elite.id) << "newest first";
  list = store_->validations().ListValidations(run.id, 1);
  ASSERT_TRUE(list.ok());
  EXPECT_EQ(list->size(), 1u);
}

TEST_F(StoreValidationTest, FailedAttemptsStayPendingUntilTheLast) {
  std::vector<GenomeRecord> genomes;
  CreateRun(1, &genomes);
  const ValidationRecord v = Request(genomes[0].id);
  ValidationUpdate u;
  u.id = v.id;
  u.state = skerry::v1::VALIDATION_PENDING;
  u.attempts = 1;
  u.error = "simulator crashed";
  ASSERT_TRUE(store_->validations().CommitValidations({u}).ok());
  absl::StatusOr<std::optional<ValidationRecord>> got =
      store_->validations().GetValidation(genomes[0].id);
  ASSERT_TRUE(got.ok() && got->has_value());
  EXPECT_EQ((*got)->state, skerry::v1::VALIDATION_PENDING);
  EXPECT_EQ((*got)->attempts, 1u);
  EXPECT_EQ((*got)->error, "simulator crashed");
  u.state = skerry::v1::VALIDATION_FAILED;
  u.attempts = 3;
  u.now_ms = 7000;
  ASSERT_TRUE(store_->validations().CommitValidations({u}).ok());
  got = store_->validations().GetValidation(genomes[0].id);
  ASSERT_TRUE(got.ok() && got->has_value());
  EXPECT_EQ((*got)->state, skerry::v1::VALIDATION_FAILED);
  EXPECT_EQ((*got)->completed_ms, 7000);
}

TEST_F(StoreValidationTest, TrimmingAFinishedRunTrimsItsValidations) {
  std::vector<GenomeRecord> genomes;
  const RunRecord run = CreateRun(1, &genomes);
  Evaluate(genomes, {4.0, 3.0, 2.0, 1.0});
  std::vector<GenomeRecord> next = NextGeneration(run, genomes[3], true);
  Request(next[1].id);
  ASSERT_TRUE(store_->runs()
                  .FinishRun(run.id, skerry::v1::FINISHED, "done", 0, 9000)
                  .ok());
  absl::StatusOr<std::vector<ValidationRecord>> list =
      store_->validations().ListValidations(run.id, 10);
  ASSERT_TRUE(list.ok());
  ASSERT_EQ(list->size(), 1u) << "generation 1 is gone, with its validation";
  EXPECT_EQ((*list)[0].genome_id, genomes[3].id);
}

// Regression: a pending validation of a natural ES sample, which the store
// keeps as its recipe, was read back at restart by unpacking the recipe as
// genes, which fails: the coordinator could not start on such a store. It is
// rebuilt from its distribution genome, as every genome read rebuilds it.
TEST_F(StoreValidationTest, APendingValidationOfASampleKeptAsItsRecipeIsRead) {
  RunRecord run = MakeRun(SmallSpec(1));
  std::vector<GenomeRecord> genomes;
  GenomeRecord centre = MakeGenome(0, 0, 0, 0.25);
  centre.origin = skerry::v1::DISTRIBUTION;
  genomes.push_back(centre);
  SampleRecipe r;
  r.seed = 5;
  r.length = 2;
  r.sigma = 0.1;
  r.lower = -1;
  r.upper = 1;
  for (uint32_t slot = 1; slot <= 2; ++slot) {
    GenomeRecord g = MakeGenome(0, 0, slot, 0);
    g.origin = skerry::v1::SAMPLED;
    g.genes.clear();
    g.parent_a_slot = 0;
    r.minus = slot == 2;
    g.recipe = r;
    genomes.push_back(g);
  }
  ASSERT_TRUE(store_->runs().CreateRun(&run, &genomes).ok());
  const ValidationRecord v = Request(genomes[2].id);
  absl::StatusOr<std::vector<ValidationRecord>> pending =
      store_->validations().PendingValidations();
  ASSERT_TRUE(pending.ok()) << pending.status();
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ(pending->front().id, v.id);
  absl::StatusOr<std::vector<double>> want = BuildSample(r, centre.genes);
  ASSERT_TRUE(want.ok());
  EXPECT_EQ(pending->front().genes, *want);
}

}  // namespace
}  // namespace skerry::store
