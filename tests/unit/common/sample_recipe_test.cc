// Tests for the natural ES sample recipe (common/sample_recipe.h): the
// encoding round trip, how it is told apart from the gene encodings, the
// rebuild against the formula written out, and errors naming what is wrong.
#include "common/sample_recipe.h"

#include <algorithm>
#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "common/genes.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

SampleRecipe Recipe() {
  SampleRecipe r;
  r.seed = 0x0123456789abcdefULL;
  r.island = 3;
  r.generation = 41;
  r.pair = 7;
  r.minus = true;
  r.length = 5;
  r.sigma = 0.25;
  r.lower = -1.0;
  r.upper = 1.0;
  return r;
}

TEST(SampleRecipeTest, RoundTripsBitForBit) {
  const SampleRecipe r = Recipe();
  const std::string bytes = PackRecipe(r);
  ASSERT_EQ(bytes.size(), kRecipeBytes);
  EXPECT_EQ(bytes[0], kRecipeTag);
  EXPECT_TRUE(IsRecipe(bytes));
  absl::StatusOr<SampleRecipe> back = UnpackRecipe(bytes);
  ASSERT_TRUE(back.ok()) << back.status();
  EXPECT_EQ(*back, r);
  EXPECT_EQ(back->seed, r.seed);
  EXPECT_EQ(back->pair, 7u);
  EXPECT_TRUE(back->minus);
  EXPECT_FALSE(back->float32);
}

// 50 bytes is neither 8n (float64 genes) nor 1 + 4n (float32 genes), so no
// genes can be mistaken for a recipe, and the gene codec refuses a recipe.
TEST(SampleRecipeTest, IsToldApartFromEveryGeneEncoding) {
  EXPECT_NE(kRecipeBytes % 8, 0u);
  EXPECT_NE(kRecipeBytes % 4, 1u);
  for (size_t n : {1, 6, 7, 100}) {
    std::vector<double> genes(n, 0.5);
    EXPECT_FALSE(IsRecipe(PackGenes(genes))) << n;
    genes[0] = 0.1;  // not a float32 value: the float64 encoding
    EXPECT_FALSE(IsRecipe(PackGenes(genes))) << n;
  }
  EXPECT_FALSE(UnpackGenes(PackRecipe(Recipe())).ok());
}

// genes[j] = clamp(centre[j] + s sigma eps[j], lower, upper), s = -1 for the
// minus sample, eps from the pair's stream: written out here.
TEST(SampleRecipeTest, BuildsTheFormulaFromTheCentreAndThePairsStream) {
  SampleRecipe r = Recipe();
  const std::vector<double> centre = {0.0, 0.5, -0.5, 0.99, -0.99};
  const std::vector<double> eps =
      SamplePerturbation(r.seed, r.island, r.generation, r.pair, r.length);
  ASSERT_EQ(eps.size(), 5u);
  for (const bool minus : {false, true}) {
    r.minus = minus;
    absl::StatusOr<std::vector<double>> genes = BuildSample(r, centre);
    ASSERT_TRUE(genes.ok()) << genes.status();
    for (size_t j = 0; j < 5; ++j) {
      const double s = minus ? -1.0 : 1.0;
      EXPECT_EQ((*genes)[j],
                std::clamp(centre[j] + s * 0.25 * eps[j], -1.0, 1.0));
    }
  }
  // Another pair, generation, island or seed draws another eps.
  EXPECT_NE(SamplePerturbation(r.seed, 3, 41, 8, 5), eps);
  EXPECT_NE(SamplePerturbation(r.seed, 3, 42, 7, 5), eps);
  EXPECT_NE(SamplePerturbation(r.seed, 2, 41, 7, 5), eps);
  EXPECT_NE(SamplePerturbation(r.seed + 1, 3, 41, 7, 5), eps);
  // FLOAT32: every gene a float32 value inside the bounds.
  r.float32 = true;
  absl::StatusOr<std::vector<double>> narrow = BuildSample(r, centre);
  ASSERT_TRUE(narrow.ok());
  EXPECT_TRUE(FitsFloat32(*narrow));
}

// Sigma 0 is the centre itself, clamped, with no perturbation drawn: how a
// distribution genome goes to a worker. Bit for bit, the sign of a zero too
// (centre + 0 x eps would make -0.0 into +0.0).
TEST(SampleRecipeTest, SigmaZeroIsTheCentreItselfBitForBit) {
  SampleRecipe r = Recipe();
  r.sigma = 0;
  std::vector<double> centre(r.length, 0.25);
  centre[0] = -0.0;
  centre[1] = 1e9;  // clamped to the upper bound
  absl::StatusOr<std::vector<double>> genes = BuildSample(r, centre);
  ASSERT_TRUE(genes.ok()) << genes.status();
  EXPECT_TRUE(std::signbit((*genes)[0]));
  EXPECT_EQ((*genes)[0], 0.0);
  EXPECT_EQ((*genes)[1], r.upper);
  for (size_t j = 2; j < genes->size(); ++j) EXPECT_EQ((*genes)[j], 0.25);
  EXPECT_EQ(BuildSampleFrom(r, centre, {}), *genes);
}

TEST(SampleRecipeTest, BadInputIsRefusedNamingWhatIsWrong) {
  absl::StatusOr<std::vector<double>> short_centre =
      BuildSample(Recipe(), std::vector<double>{0.0, 1.0});
  ASSERT_FALSE(short_centre.ok());
  EXPECT_THAT(short_centre.status().message(),
              HasSubstr("its recipe makes 5 genes but its distribution "
                        "genome has 2"));
  std::string bytes = PackRecipe(Recipe());
  bytes[1] = '\x04';
  EXPECT_THAT(UnpackRecipe(bytes).status().message(),
              HasSubstr("unknown flags 4"));
  SampleRecipe r = Recipe();
  r.sigma = -1.0;
  EXPECT_THAT(UnpackRecipe(PackRecipe(r)).status().message(),
              HasSubstr("sigma -1"));
  r = Recipe();
  r.lower = 2.0;
  EXPECT_THAT(UnpackRecipe(PackRecipe(r)).status().message(),
              HasSubstr("bounds [2, 1]"));
  // The same checks when a recipe comes from a task, not the store.
  r = Recipe();
  r.sigma = std::numeric_limits<double>::quiet_NaN();
  EXPECT_THAT(BuildSample(r, std::vector<double>(5, 0.0)).status().message(),
              HasSubstr("sigma nan"));
  EXPECT_THAT(UnpackRecipe("short").status().message(),
              HasSubstr("5 bytes, not the 50 bytes"));
}

}  // namespace
}  // namespace skerry
