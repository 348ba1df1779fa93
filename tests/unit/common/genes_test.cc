// The genome codec (common/genes.h): both encodings give the same doubles
// back, the compact one is used exactly when it is lossless, and a bad blob
// is refused with its length named.
//
// Reference values: IEEE 754-2008 binary32 (float32) has a 24-bit
// significand, so 0.1f is 13421773 x 2^-27 = 0.100000001490116119384765625
// and 16777217 = 2^24 + 1 is the first integer it cannot hold (from the
// standard's definition of the format; the decimal expansions were worked
// out by hand and agree with what any C compiler prints for
// (double)0.1f and (float)16777217.0).
#include "common/genes.h"

#include <cmath>
#include <cstring>
#include <limits>
#include <string>
#include <vector>

#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

bool SameBits(double a, double b) { return std::memcmp(&a, &b, 8) == 0; }

TEST(GenesTest, Float64GenesRoundTripBitForBitInEightBytesEach) {
  const std::vector<double> genes = {0.1, -2.5e-300, 1e300, -0.0, 3.0};
  const std::string packed = PackGenes(genes);
  EXPECT_EQ(packed.size(), 8 * genes.size());
  absl::StatusOr<std::vector<double>> back = UnpackGenes(packed);
  ASSERT_TRUE(back.ok()) << back.status();
  ASSERT_EQ(back->size(), genes.size());
  for (size_t i = 0; i < genes.size(); ++i) {
    EXPECT_TRUE(SameBits((*back)[i], genes[i])) << i;
  }
}

TEST(GenesTest, GenesThatAreFloat32ValuesTakeFourBytesEachAfterATag) {
  const std::vector<double> genes = {0.5, -0.0, 3.0,
                                     0.100000001490116119384765625, 16777216.0};
  ASSERT_TRUE(FitsFloat32(genes));
  const std::string packed = PackGenes(genes);
  ASSERT_EQ(packed.size(), 1 + 4 * genes.size());
  EXPECT_EQ(packed[0], kFloat32Tag);
  absl::StatusOr<std::vector<double>> back = UnpackGenes(packed);
  ASSERT_TRUE(back.ok()) << back.status();
  ASSERT_EQ(back->size(), genes.size());
  for (size_t i = 0; i < genes.size(); ++i) {
    EXPECT_TRUE(SameBits((*back)[i], genes[i])) << i;
  }
  // The digest's form is the float64 encoding of the same values.
  absl::StatusOr<std::string> wide = Float64Bytes(packed);
  ASSERT_TRUE(wide.ok());
  std::string expected(8 * genes.size(), '\0');
  for (size_t i = 0; i < genes.size(); ++i) {
    std::memcpy(&expected[8 * i], &genes[i], 8);  // little-endian machine
  }
  EXPECT_EQ(*wide, expected);
  EXPECT_EQ(*Float64Bytes(PackGenes({0.1})), PackGenes({0.1}));
}

TEST(GenesTest, OneGeneAFloat32CannotHoldKeepsTheWholeGenomeFloat64) {
  EXPECT_FALSE(FitsFloat32({0.5, 0.1}));    // 0.1 is not 0.1f
  EXPECT_FALSE(FitsFloat32({16777217.0}));  // 2^24 + 1
  EXPECT_FALSE(FitsFloat32({1e300}));       // out of range
  EXPECT_EQ(PackGenes({0.5, 0.1}).size(), 16u);
  EXPECT_EQ(PackGenes({}).size(), 0u);  // empty stays the float64 form
}

TEST(GenesTest, RoundingGivesTheNearestFloat32InsideTheBounds) {
  std::vector<double> genes = {0.1, -0.1, 1.0, 5.12};
  RoundToFloat32(&genes, -5.12, 5.12);
  EXPECT_TRUE(FitsFloat32(genes));
  EXPECT_EQ(genes[0], 0.100000001490116119384765625);  // 13421773 x 2^-27
  EXPECT_EQ(genes[1], -0.100000001490116119384765625);
  EXPECT_EQ(genes[2], 1.0);
  // 5.12 x 2^22 = 21474836.48 rounds down: 21474836 x 2^-22, inside.
  EXPECT_EQ(genes[3], 21474836.0 / 4194304.0);
  // 0.1 rounds up past an upper bound of 0.1, so it takes the float32 below:
  // 13421772 x 2^-27. Likewise -0.1 against a lower bound of -0.1.
  std::vector<double> at_bound = {0.1, -0.1};
  RoundToFloat32(&at_bound, -0.1, 0.1);
  EXPECT_EQ(at_bound[0], 0.0999999940395355224609375);
  EXPECT_EQ(at_bound[1], -0.0999999940395355224609375);
}

TEST(GenesTest, BadBlobsAreRefusedNamingTheirLength) {
  absl::StatusOr<std::vector<double>> odd = UnpackGenes(std::string(6, 'x'));
  EXPECT_FALSE(odd.ok());
  EXPECT_THAT(std::string(odd.status().message()), HasSubstr("6 bytes"));
  std::string untagged(5, '\0');
  untagged[0] = '\x07';
  absl::StatusOr<std::vector<double>> bad = UnpackGenes(untagged);
  EXPECT_FALSE(bad.ok());
  EXPECT_THAT(std::string(bad.status().message()), HasSubstr("byte 7"));
  EXPECT_FALSE(Float64Bytes(untagged).ok());
}

}  // namespace
}  // namespace skerry
