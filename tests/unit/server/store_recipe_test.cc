// GA genomes kept as their recipes (common/child_recipe.h): what the store
// writes between keyframes, how it rebuilds the genes on every read
// (server/store/replay.h), the digest, `--check`'s keyframe replay, and the
// errors of a broken ancestry.
#include <algorithm>
#include <cmath>
#include <memory>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/child_recipe.h"
#include "common/genes.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"
#include "server/store/check.h"
#include "server/store/sqlite.h"
#include "server/store/store.h"
#include "tests/unit/server/sqlite_test_util.h"
#include "tests/unit/server/store_fixture.h"

namespace skerry::store {
namespace {

using skerry::testing::RawQuery;
using ::testing::HasSubstr;

// The rows of `sql` on a Skerry connection to `path`, columns joined by '|',
// each row between newlines.
std::string Rows(const std::string& path, const std::string& sql) {
  absl::StatusOr<std::unique_ptr<Connection>> conn =
      Connection::Open(path, SQLITE_OPEN_READONLY);
  EXPECT_TRUE(conn.ok()) << conn.status();
  if (!conn.ok()) return "";
  absl::StatusOr<Statement> s = (*conn)->Prepare(sql);
  EXPECT_TRUE(s.ok()) << s.status();
  std::string out = "\n";  // each row between newlines
  while (s.ok()) {
    absl::StatusOr<bool> row = s->Step();
    if (!row.ok() || !*row) break;
    for (int c = 0; c < s->ColumnCount(); ++c) {
      absl::StrAppend(&out, c > 0 ? "|" : "", s->ColumnText(c));
    }
    out += "\n";
  }
  return out;
}

// SQL on a Skerry connection (checksums kept right).
void Edit(const std::string& path, const std::string& sql) {
  absl::StatusOr<std::unique_ptr<Connection>> conn =
      Connection::Open(path, SQLITE_OPEN_READWRITE);
  ASSERT_TRUE(conn.ok()) << conn.status();
  absl::Status s = (*conn)->Exec(sql);
  EXPECT_TRUE(s.ok()) << s << " in " << sql;
}

std::string HexOf(const std::string& bytes) {
  static const char kDigits[] = "0123456789abcdef";
  std::string out;
  for (unsigned char c : bytes) {
    out += kDigits[c >> 4];
    out += kDigits[c & 15];
  }
  return out;
}

constexpr uint32_t kLength = 40;
constexpr uint32_t kGenerations = 8;

// One island of 6: an elite, an immigrant and four bred children a
// generation, mutation and crossover both likely.
RunSpec RecipeSpec(uint32_t keyframe_interval, bool float32 = false,
                   uint32_t length = kLength, uint32_t population = 6) {
  RunSpec spec;
  spec.set_name("recipe-test");
  spec.set_seed(29);
  spec.set_genome_length(length);
  spec.mutable_evaluator()->mutable_builtin()->set_function("sphere");
  spec.mutable_ga()->set_population_size(population);
  spec.mutable_ga()->set_elites(1);
  spec.mutable_ga()->set_immigrants(1);
  spec.mutable_ga()->mutable_crossover()->set_rate(0.6);
  spec.mutable_ga()->mutable_mutation()->set_rate(0.2);
  spec.mutable_ga()->set_keyframe_interval(keyframe_interval);
  spec.mutable_stop()->set_max_generations(kGenerations);
  if (float32) spec.set_gene_precision(skerry::v1::FLOAT32);
  absl::StatusOr<RunSpec> prepared = PrepareSpec(spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return *prepared;
}

// Sphere: the sum of squared genes (Jamil & Yang 2013, REFERENCES.md).
double Sphere(const std::vector<double>& genes) {
  double s = 0.0;
  for (double g : genes) s += g * g;
  return s;
}

class RecipeStoreTest : public StoreTest {
 protected:
  // Breeds and stores a whole run of `spec`, every genome evaluated; returns
  // its id and keeps every generation as bred (with genes) in `bred_`.
  int64_t StoreRun(const RunSpec& spec) {
    bred_.clear();
    champions_.clear();
    RunRecord run = MakeRun(spec);
    std::vector<GenomeRecord> gen = engine::Seed(spec, 0).value();
    EXPECT_TRUE(store_->runs().CreateRun(&run, &gen).ok());
    for (uint32_t g = 0;; ++g) {
      std::vector<GenomeRecord> pending;
      std::vector<double> scores;
      for (GenomeRecord& r : gen) {
        r.run_id = run.id;
        if (r.state != skerry::v1::PENDING) continue;  // an elite's is kept
        r.state = skerry::v1::EVALUATED;
        r.score = Sphere(r.genes);
        r.attempts = 1;
        pending.push_back(r);
        scores.push_back(r.score);
      }
      Evaluate(pending, scores);
      bred_.push_back(gen);
      if (g + 1 == kGenerations) break;
      absl::StatusOr<std::vector<GenomeRecord>> next =
          engine::Breed(spec, 0, gen, {});
      EXPECT_TRUE(next.ok()) << next.status();
      for (GenomeRecord& r : *next) r.run_id = run.id;
      GenerationCommit c;
      c.run_id = run.id;
      c.island = 0;
      c.completed.run_id = run.id;
      c.completed.generation = g;
      c.next = &*next;
      // The generation's best becomes the champion (the store does not
      // compare), kept whole when it was kept as its recipe alone.
      const GenomeRecord* best = &gen[0];
      for (const GenomeRecord& r : gen) {
        if (r.score < best->score) best = &r;
      }
      c.champion = std::make_pair(best->id, best->score);
      // The champion, and with validate_slot_2_ slot 2 as the genome to
      // validate: both kept whole (the store ignores those stored whole
      // already).
      c.champion_genome = best;
      champions_.push_back(best->id);
      if (validate_slot_2_) {
        ValidationRequest v;
        v.genome_id = gen[2].id;
        v.cases = 1;
        v.genome = &gen[2];
        c.validate = v;
        champions_.push_back(gen[2].id);
      }
      EXPECT_TRUE(store_->runs().CommitGeneration(c).ok());
      gen = *std::move(next);
    }
    return run.id;
  }

  std::vector<std::vector<GenomeRecord>> bred_;
  // Each generation's best (and slot 2 with validate_slot_2_), but the last
  // generation's: kept whole by CommitGeneration.
  std::vector<int64_t> champions_;
  bool validate_slot_2_ = false;
};

TEST_F(RecipeStoreTest, EveryGenomeReadBackHasTheGenesItWasBredWith) {
  for (bool float32 : {false, true}) {
    SCOPED_TRACE(float32 ? "FLOAT32" : "FLOAT64");
    const int64_t run = StoreRun(RecipeSpec(3, float32));
    for (uint32_t g = 0; g < kGenerations; ++g) {
      absl::StatusOr<std::vector<GenomeRecord>> read =
          store_->genomes().GetGeneration(run, 0, g);
      ASSERT_TRUE(read.ok()) << read.status();
      ASSERT_EQ(read->size(), bred_[g].size());
      for (size_t i = 0; i < read->size(); ++i) {
        EXPECT_EQ((*read)[i].genes, bred_[g][i].genes)
            << "generation " << g << " slot " << i;
        // Bit for bit, sign of zero included: the same bytes packed.
        EXPECT_EQ(PackGenes((*read)[i].genes), PackGenes(bred_[g][i].genes));
      }
    }
    // One genome alone, its ancestry read back from the store.
    const GenomeRecord& last = bred_[kGenerations - 1][3];
    absl::StatusOr<GenomeRecord> one = store_->genomes().GetGenome(last.id);
    ASSERT_TRUE(one.ok()) << one.status();
    EXPECT_EQ(one->genes, last.genes);
  }
}

// Long genomes: each level of the replay (40 genomes of 40,000 genes) is
// built on several threads (replay.cc's kThreadedWork), and gives the same
// genes.
TEST_F(RecipeStoreTest, LongGenomesRebuiltOnSeveralThreadsAreTheSame) {
  const int64_t run = StoreRun(RecipeSpec(100, false, 40000, 40));
  for (uint32_t g : {1u, kGenerations - 1}) {
    absl::StatusOr<std::vector<GenomeRecord>> read =
        store_->genomes().GetGeneration(run, 0, g);
    ASSERT_TRUE(read.ok()) << read.status();
    ASSERT_EQ(read->size(), bred_[g].size());
    for (size_t i = 0; i < read->size(); ++i) {
      EXPECT_TRUE((*read)[i].genes == bred_[g][i].genes)
          << "generation " << g << " slot " << i;
    }
  }
}

TEST_F(RecipeStoreTest, ARowHoldsItsRecipeAloneAndAKeyframeItsGenesToo) {
  validate_slot_2_ = true;
  const int64_t run = StoreRun(RecipeSpec(3));
  const std::string rows = Rows(
      path(), absl::StrCat("SELECT id, generation, origin, length(genes) FROM "
                           "genomes WHERE run_id = ",
                           run, " ORDER BY generation, slot"));
  // Generation 0 (seeds) and each generation's immigrant replay
  // from their stream alone; generations 3 and 6 are keyframes for the rest.
  const size_t whole = kChildRecipeBytes + 8 * kLength;
  for (uint32_t g = 0; g < kGenerations; ++g) {
    for (const GenomeRecord& r : bred_[g]) {
      const bool fresh =
          r.origin == skerry::v1::SEEDED || r.origin == skerry::v1::IMMIGRANT;
      const bool keyframe = !fresh && g % 3 == 0;
      EXPECT_EQ(r.keyframe, keyframe) << g << " " << r.slot;
      // A champion (or a genome validated) is kept whole from its commit.
      const bool champion = std::find(champions_.begin(), champions_.end(),
                                      r.id) != champions_.end();
      EXPECT_THAT(rows,
                  HasSubstr(absl::StrCat(
                      "\n", r.id, "|", g, "|", r.origin, "|",
                      keyframe || champion ? whole : kChildRecipeBytes, "\n")))
          << "generation " << g << " slot " << r.slot;
    }
  }
}

TEST_F(RecipeStoreTest, TheDigestOfARunKeptAsRecipesIsThatOfTheRunKeptWhole) {
  const int64_t whole = StoreRun(RecipeSpec(1));
  const int64_t recipes = StoreRun(RecipeSpec(4));
  EXPECT_LT(
      std::stoll(RawQuery(path(), absl::StrCat("SELECT sum(length(genes)) FROM "
                                               "genomes WHERE run_id = ",
                                               recipes))),
      std::stoll(RawQuery(path(), absl::StrCat("SELECT sum(length(genes)) FROM "
                                               "genomes WHERE run_id = ",
                                               whole))));
  absl::StatusOr<GenomeStore::Digest> a = store_->genomes().RunDigest(whole);
  absl::StatusOr<GenomeStore::Digest> b = store_->genomes().RunDigest(recipes);
  ASSERT_TRUE(a.ok()) << a.status();
  ASSERT_TRUE(b.ok()) << b.status();
  EXPECT_EQ(a->sha256, b->sha256);
  EXPECT_EQ(a->genomes, b->genomes);
}

// What is validated, exported or asked for is kept whole from then on
// (GenomeStore::KeepWhole): the row becomes a keyframe, every read gives
// the same genes, the digest and `--check` are unchanged, and a read-only
// database is not written.
TEST_F(RecipeStoreTest, AGenomeAskedForIsKeptWholeFromThenOn) {
  const int64_t run = StoreRun(RecipeSpec(100));
  const GenomeRecord* chosen = nullptr;
  for (const GenomeRecord& r : bred_[kGenerations - 1]) {
    if (r.child_recipe.has_value() && r.origin != skerry::v1::IMMIGRANT &&
        r.slot != 2 && r.slot != 0) {
      chosen = &r;
      break;
    }
  }
  ASSERT_NE(chosen, nullptr);
  const std::string length_sql =
      absl::StrCat("SELECT length(genes) FROM genomes WHERE id = ", chosen->id);
  ASSERT_EQ(RawQuery(path(), length_sql), absl::StrCat(kChildRecipeBytes));
  absl::StatusOr<GenomeStore::Digest> before = store_->genomes().RunDigest(run);
  ASSERT_TRUE(before.ok()) << before.status();

  // A read-only database is not written.
  {
    Store::Options read_only;
    read_only.read_only = true;
    absl::StatusOr<std::unique_ptr<Store>> ro = Store::Open(path(), read_only);
    ASSERT_TRUE(ro.ok()) << ro.status();
    absl::StatusOr<GenomeRecord> g = (*ro)->genomes().GetGenome(chosen->id);
    ASSERT_TRUE(g.ok()) << g.status();
    EXPECT_FALSE(g->keyframe);
    EXPECT_TRUE((*ro)->genomes().KeepWhole(*g).ok());
  }
  EXPECT_EQ(RawQuery(path(), length_sql), absl::StrCat(kChildRecipeBytes));

  // Without its genes at hand nothing is written either.
  GenomeRecord bare = *chosen;
  bare.genes.clear();
  ASSERT_TRUE(store_->genomes().KeepWhole(bare).ok());
  EXPECT_EQ(RawQuery(path(), length_sql), absl::StrCat(kChildRecipeBytes));

  absl::StatusOr<GenomeRecord> asked = store_->genomes().GetGenome(chosen->id);
  ASSERT_TRUE(asked.ok()) << asked.status();
  EXPECT_FALSE(asked->keyframe);
  ASSERT_TRUE(store_->genomes().KeepWhole(*asked).ok());
  const size_t whole = kChildRecipeBytes + 8 * kLength;
  EXPECT_EQ(RawQuery(path(), length_sql), absl::StrCat(whole));
  absl::StatusOr<GenomeRecord> again = store_->genomes().GetGenome(chosen->id);
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_TRUE(again->keyframe);
  EXPECT_EQ(again->genes, chosen->genes);
  // A keyframe's genes are never rewritten, whatever a caller passes.
  GenomeRecord other = *asked;
  other.genes[0] += 1.0;
  ASSERT_TRUE(store_->genomes().KeepWhole(other).ok());
  again = store_->genomes().GetGenome(chosen->id);
  ASSERT_TRUE(again.ok()) << again.status();
  EXPECT_EQ(again->genes, chosen->genes);

  absl::StatusOr<GenomeStore::Digest> after = store_->genomes().RunDigest(run);
  ASSERT_TRUE(after.ok()) << after.status();
  EXPECT_EQ(after->sha256, before->sha256);
  store_.reset();
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_TRUE(report->ok()) << report->ToString();
}

TEST_F(RecipeStoreTest, CheckReplaysKeyframesAndNamesOneWhoseGenesDiffer) {
  const int64_t run = StoreRun(RecipeSpec(3));
  store_.reset();
  absl::StatusOr<CheckReport> clean = CheckDatabase(path());
  ASSERT_TRUE(clean.ok()) << clean.status();
  EXPECT_TRUE(clean->ok()) << clean->ToString();
  // A keyframe's genes changed through a Skerry connection (checksums kept
  // right): only the replay can tell.
  const GenomeRecord& keyframe = bred_[3][2];
  ASSERT_TRUE(keyframe.keyframe);
  std::vector<double> other = keyframe.genes;
  other[0] = other[0] == 0.5 ? 0.25 : 0.5;
  Edit(path(),
       absl::StrCat("UPDATE genomes SET genes = x'",
                    HexOf(PackChildRecipe(*keyframe.child_recipe, other)),
                    "' WHERE id = ", keyframe.id));
  absl::StatusOr<CheckReport> report = CheckDatabase(path());
  ASSERT_TRUE(report.ok()) << report.status();
  EXPECT_THAT(
      report->ToString(),
      HasSubstr(absl::StrCat(
          "run ", run, ": island 0 generation 3 slot 2 genome ", keyframe.id,
          ": replaying its recipe does not give its stored genes")));
}

TEST_F(RecipeStoreTest, APendingValidationOfAGenomeKeptAsItsRecipeHasItsGenes) {
  StoreRun(RecipeSpec(5));
  // A bred child of generation 6, kept as its recipe alone (not a champion).
  const GenomeRecord* child = nullptr;
  for (const GenomeRecord& r : bred_[6]) {
    const bool champion = std::find(champions_.begin(), champions_.end(),
                                    r.id) != champions_.end();
    if (r.origin == skerry::v1::CROSSOVER && !champion) child = &r;
  }
  ASSERT_NE(child, nullptr);
  ValidationRequest request;
  request.genome_id = child->id;
  request.cases = 3;
  request.requested_by = "alice";
  request.now_ms = 2000;
  ASSERT_TRUE(store_->validations().RequestValidation(request).ok());
  absl::StatusOr<std::vector<ValidationRecord>> pending =
      store_->validations().PendingValidations();
  ASSERT_TRUE(pending.ok()) << pending.status();
  ASSERT_EQ(pending->size(), 1u);
  EXPECT_EQ(pending->front().genes, child->genes);
}

TEST_F(RecipeStoreTest, AMissingAncestorIsDataLossNamingTheGenomeAndItsParent) {
  const int64_t run = StoreRun(RecipeSpec(5));
  // A bred child of generation 2 whose parent (generation 1) is deleted.
  const GenomeRecord* child = nullptr;
  for (const GenomeRecord& r : bred_[2]) {
    if (r.origin == skerry::v1::MUTATION || r.origin == skerry::v1::CROSSOVER) {
      child = &r;
      break;
    }
  }
  ASSERT_NE(child, nullptr);
  Edit(path(),
       absl::StrCat("DELETE FROM genomes WHERE id = ", child->parent_a));
  absl::StatusOr<GenomeRecord> read = store_->genomes().GetGenome(child->id);
  ASSERT_TRUE(absl::IsDataLoss(read.status())) << read.status();
  EXPECT_THAT(std::string(read.status().message()),
              HasSubstr(absl::StrCat("run ", run, ": genome ", child->id,
                                     ": its parent #", child->parent_a,
                                     " is not in the database, so its genes "
                                     "cannot be rebuilt")));
  // The digest says the same of the first genome of generation 2 that
  // needs it, where it is, and not that a checksum failed.
  absl::StatusOr<GenomeStore::Digest> digest = store_->genomes().RunDigest(run);
  ASSERT_TRUE(absl::IsDataLoss(digest.status())) << digest.status();
  EXPECT_THAT(
      std::string(digest.status().message()),
      HasSubstr(absl::StrCat("run ", run, " island 0 generation 2 slot ")));
  EXPECT_THAT(std::string(digest.status().message()),
              HasSubstr(absl::StrCat(": its parent #", child->parent_a,
                                     " is not in the database")));
  EXPECT_THAT(std::string(digest.status().message()),
              ::testing::Not(HasSubstr("checksum")));
  // The rest of the run is still read.
  EXPECT_TRUE(store_->genomes().GetGeneration(run, 0, 0).ok());
}

}  // namespace
}  // namespace skerry::store
