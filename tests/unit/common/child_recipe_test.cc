// Tests for the GA genome recipe (common/child_recipe.h): the encoding round
// trip, how it is told apart from the gene encodings and the natural ES
// recipe, rebuilds against what crossover and mutation are defined to do,
// and errors naming what is wrong.
#include "common/child_recipe.h"

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "common/genes.h"
#include "common/sample_recipe.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "skerry/v1/spec.pb.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

ChildRecipe Recipe(ChildKind kind) {
  ChildRecipe r;
  r.kind = kind;
  r.crossover_method = skerry::v1::UNIFORM;
  r.seed = 0xfeedfacecafebeefULL;
  r.island = 2;
  r.generation = 17;
  r.slot = 5;
  r.length = 6;
  r.crossover_rate = kind == ChildKind::kCrossover ? 1.0 : 0.0;
  r.blend_alpha = 0.0;
  r.mutation_rate = 0.5;
  r.mutation_step = 0.1;
  r.lower = -4.0;
  r.upper = 4.0;
  r.init_lower = -1.0;
  r.init_upper = 1.0;
  return r;
}

const std::vector<double> kA = {1, 2, 3, -1, -2, -3};
const std::vector<double> kB = {0.5, 0.25, -0.5, 3, 2.5, -2.5};

TEST(ChildRecipeTest, RoundTripsBitForBitWithAndWithoutGenes) {
  for (ChildKind kind :
       {ChildKind::kSeed, ChildKind::kImmigrant, ChildKind::kMutation,
        ChildKind::kCrossover, ChildKind::kCopy}) {
    ChildRecipe r = Recipe(kind);
    r.float32 = kind == ChildKind::kCopy;
    r.blend_alpha = 0.375;
    const std::string alone = PackChildRecipe(r);
    ASSERT_EQ(alone.size(), kChildRecipeBytes);
    EXPECT_EQ(alone[0], kChildRecipeTag);
    absl::StatusOr<UnpackedChild> back = UnpackChildRecipe(alone);
    ASSERT_TRUE(back.ok()) << back.status();
    EXPECT_TRUE(back->recipe == r);
    EXPECT_FALSE(back->genes.has_value());

    const std::string keyframe = PackChildRecipe(r, kA);
    EXPECT_EQ(keyframe.size(), kChildRecipeBytes + PackGenes(kA).size());
    back = UnpackChildRecipe(keyframe);
    ASSERT_TRUE(back.ok()) << back.status();
    EXPECT_TRUE(back->recipe == r);
    ASSERT_TRUE(back->genes.has_value());
    EXPECT_EQ(*back->genes, kA);
  }
}

TEST(ChildRecipeTest, IsToldApartFromGenesAndFromTheSampleRecipe) {
  const ChildRecipe r = Recipe(ChildKind::kMutation);
  EXPECT_TRUE(IsChildRecipe(PackChildRecipe(r)));
  EXPECT_TRUE(IsChildRecipe(PackChildRecipe(r, kA)));
  // A float32 keyframe: 98 + 1 + 4n bytes.
  EXPECT_TRUE(IsChildRecipe(PackChildRecipe(r, {0.5, 0.25, -1, 2, 0, 1})));
  EXPECT_EQ(PackChildRecipe(r, {0.5, 0.25, -1, 2, 0, 1}).size(),
            kChildRecipeBytes + 1 + 4 * 6);
  // Gene blobs of every length up to 64 genes, whatever their first byte:
  // 8n and 1 + 4n are never 98 + 8n nor 99 + 4n.
  for (size_t n = 1; n <= 64; ++n) {
    std::string genes = PackGenes(std::vector<double>(n, 0.1));
    genes[0] = kChildRecipeTag;
    EXPECT_FALSE(IsChildRecipe(genes)) << n;
    std::string narrow = PackGenes(std::vector<double>(n, 0.5));
    EXPECT_FALSE(IsChildRecipe(narrow)) << n;
  }
  SampleRecipe sample;
  sample.length = 3;
  EXPECT_FALSE(IsChildRecipe(PackRecipe(sample)));
  EXPECT_FALSE(IsRecipe(PackChildRecipe(r)));
  // The genes decoder refuses a recipe rather than reading it as genes.
  EXPECT_FALSE(UnpackGenes(PackChildRecipe(r)).ok());
  EXPECT_FALSE(UnpackGenes(PackChildRecipe(r, kA)).ok());
}

TEST(ChildRecipeTest, ACopyIsItsParentAndASeedDependsOnItsStreamAlone) {
  const absl::StatusOr<std::vector<double>> copy =
      BuildChild(Recipe(ChildKind::kCopy), kA, {});
  ASSERT_TRUE(copy.ok()) << copy.status();
  EXPECT_EQ(*copy, kA);
  const ChildRecipe seed = Recipe(ChildKind::kSeed);
  const absl::StatusOr<std::vector<double>> s1 = BuildChild(seed, {}, {});
  const absl::StatusOr<std::vector<double>> s2 = BuildChild(seed, {}, {});
  ASSERT_TRUE(s1.ok() && s2.ok());
  EXPECT_EQ(*s1, *s2);
  for (double g : *s1) {
    EXPECT_GE(g, seed.init_lower);
    EXPECT_LT(g, seed.init_upper);
  }
  ChildRecipe other_slot = seed;
  other_slot.slot += 1;
  EXPECT_NE(*BuildChild(other_slot, {}, {}), *s1);
  // An immigrant of the same key draws another stream than a seed.
  ChildRecipe immigrant = seed;
  immigrant.kind = ChildKind::kImmigrant;
  EXPECT_NE(*BuildChild(immigrant, {}, {}), *s1);
}

TEST(ChildRecipeTest, RebuildsFollowTheDefinitionsOfTheOperators) {
  // No mutation: a uniform crossover's child takes each gene from one of
  // its parents (uniform crossover's definition: common practice).
  ChildRecipe cross = Recipe(ChildKind::kCrossover);
  cross.mutation_rate = 0.0;
  const absl::StatusOr<std::vector<double>> child = BuildChild(cross, kA, kB);
  ASSERT_TRUE(child.ok()) << child.status();
  for (size_t j = 0; j < kA.size(); ++j) {
    EXPECT_TRUE((*child)[j] == kA[j] || (*child)[j] == kB[j]) << j;
  }
  // No crossover drawn and no mutation: the child is parent a.
  ChildRecipe mutation = Recipe(ChildKind::kMutation);
  mutation.mutation_rate = 0.0;
  EXPECT_EQ(*BuildChild(mutation, kA, {}), kA);
  // Mutation of every gene moves each inside the bounds, clamped there
  // (Gaussian mutation, clamped: common practice).
  mutation.mutation_rate = 1.0;
  mutation.mutation_step = 100.0;
  const absl::StatusOr<std::vector<double>> wild = BuildChild(mutation, kA, {});
  ASSERT_TRUE(wild.ok());
  for (double g : *wild) {
    EXPECT_GE(g, mutation.lower);
    EXPECT_LE(g, mutation.upper);
  }
  // FLOAT32: each gene a float32 value (common/genes.h).
  mutation.mutation_step = 0.1;
  mutation.float32 = true;
  const absl::StatusOr<std::vector<double>> narrow =
      BuildChild(mutation, kA, {});
  ASSERT_TRUE(narrow.ok());
  EXPECT_TRUE(FitsFloat32(*narrow));
}

TEST(ChildRecipeTest, ErrorsNameWhatIsWrong) {
  const ChildRecipe good = Recipe(ChildKind::kCrossover);
  auto message = [](const absl::Status& s) { return std::string(s.message()); };
  // A parent of the wrong length.
  EXPECT_THAT(message(BuildChild(good, kA, {1, 2}).status()),
              HasSubstr("parent b has 2 genes where the recipe builds 6"));
  EXPECT_THAT(message(BuildChild(Recipe(ChildKind::kCopy), {}, {}).status()),
              HasSubstr("parent a has 0 genes"));
  // A kind its stream contradicts (rate 1 always crosses).
  ChildRecipe liar = good;
  liar.kind = ChildKind::kMutation;
  EXPECT_THAT(message(BuildChild(liar, kA, kB).status()),
              HasSubstr("its stream draws a crossover where its kind says "
                        "mutation"));
  // Damaged bytes.
  std::string bytes = PackChildRecipe(good);
  bytes[1] = 9;
  EXPECT_THAT(message(UnpackChildRecipe(bytes).status()),
              HasSubstr("unknown kind 9"));
  bytes = PackChildRecipe(good);
  bytes[95] = 1;
  EXPECT_THAT(message(UnpackChildRecipe(bytes).status()),
              HasSubstr("byte 95 is not zero"));
  ChildRecipe bad = good;
  bad.mutation_rate = 1.5;
  EXPECT_THAT(message(UnpackChildRecipe(PackChildRecipe(bad)).status()),
              HasSubstr("outside [0, 1]"));
  bad = good;
  bad.mutation_step = std::numeric_limits<double>::quiet_NaN();
  EXPECT_THAT(message(UnpackChildRecipe(PackChildRecipe(bad)).status()),
              HasSubstr("mutation step nan is not finite"));
  bad = good;
  bad.lower = 5.0;
  EXPECT_THAT(message(UnpackChildRecipe(PackChildRecipe(bad)).status()),
              HasSubstr("not finite and in order"));
  bad = good;
  bad.length = 0;
  EXPECT_THAT(message(UnpackChildRecipe(PackChildRecipe(bad)).status()),
              HasSubstr("length 0 is outside [1, 1000000]"));
  // A keyframe whose genes are not the recipe's length.
  EXPECT_THAT(
      message(UnpackChildRecipe(PackChildRecipe(good, {1.0, 2.0})).status()),
      HasSubstr("its keyframe holds 2 genes where the recipe builds 6"));
}

}  // namespace
}  // namespace skerry
