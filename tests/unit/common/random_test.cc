// Tests for the counter-based random streams (common/random.h).
#include "common/random.h"

#include <cmath>
#include <cstdint>
#include <set>
#include <vector>

#include "gtest/gtest.h"

// Random123 (Debian's librandom123-dev) is the reference implementation of
// Philox by its authors; where its header is installed, our block function is
// checked against it (RandomStreamTest.PhiloxEqualsRandom123).
#if __has_include(<Random123/philox.h>)
#include <Random123/philox.h>
#define SKERRY_HAVE_RANDOM123 1
#endif

namespace skerry {
namespace {

using Block = std::array<uint32_t, 4>;

// Known-answer vectors: Random123 distribution, kat_vectors, philox4x32 10
// rounds (Salmon et al. 2011). From memory.
TEST(Philox4x32Test, MatchesKnownAnswerForZeroCounterAndKey) {
  EXPECT_EQ(Philox4x32_10({0, 0, 0, 0}, {0, 0}),
            (Block{0x6627e8d5, 0xe169c58d, 0xbc57ac4c, 0x9b00dbd8}));
}

TEST(Philox4x32Test, MatchesKnownAnswerForAllOnes) {
  EXPECT_EQ(Philox4x32_10({0xffffffff, 0xffffffff, 0xffffffff, 0xffffffff},
                          {0xffffffff, 0xffffffff}),
            (Block{0x408f276d, 0x41c83b0e, 0xa20bc7c6, 0x6d5451fd}));
}

TEST(Philox4x32Test, MatchesKnownAnswerForPiDigits) {
  EXPECT_EQ(Philox4x32_10({0x243f6a88, 0x85a308d3, 0x13198a2e, 0x03707344},
                          {0xa4093822, 0x299f31d0}),
            (Block{0xd16cfe09, 0x94fdcceb, 0x5001e420, 0x24126ea1}));
}

StreamKey Key(uint64_t seed = 42, uint32_t island = 1, uint32_t generation = 7,
              StreamPurpose purpose = StreamPurpose::kBreed,
              uint32_t slot = 3) {
  StreamKey key;
  key.run_seed = seed;
  key.island = island;
  key.generation = generation;
  key.purpose = purpose;
  key.slot = slot;
  return key;
}

std::vector<uint64_t> Draw(const StreamKey& key, int n) {
  RandomStream rng(key);
  std::vector<uint64_t> out;
  for (int i = 0; i < n; ++i) out.push_back(rng.NextU64());
  return out;
}

TEST(RandomStreamTest, SameNameGivesSameNumbers) {
  EXPECT_EQ(Draw(Key(), 100), Draw(Key(), 100));
}

TEST(RandomStreamTest, FirstWordsAreTheFirstPhiloxBlock) {
  // The stream is exactly Philox of the documented counter layout.
  const StreamKey key =
      Key(0x0123456789abcdefULL, 5, 9, StreamPurpose::kMigration, 11);
  const Block block = Philox4x32_10(
      {0, 11, 9, (static_cast<uint32_t>(StreamPurpose::kMigration) << 16) | 5},
      {0x89abcdef, 0x01234567});
  RandomStream rng(key);
  EXPECT_EQ(rng.NextU64(), (uint64_t{block[1]} << 32) | block[0]);
  EXPECT_EQ(rng.NextU64(), (uint64_t{block[3]} << 32) | block[2]);
}

TEST(RandomStreamTest, EveryNameComponentChangesTheNumbers) {
  const std::vector<uint64_t> base = Draw(Key(), 8);
  const std::vector<StreamKey> others = {
      Key(43), Key(42, 2), Key(42, 1, 8),
      Key(42, 1, 7, StreamPurpose::kSelection),
      Key(42, 1, 7, StreamPurpose::kBreed, 4),
      // High half of the seed matters too.
      Key(42 + (uint64_t{1} << 32))};
  for (size_t i = 0; i < others.size(); ++i) {
    SCOPED_TRACE(i);
    EXPECT_NE(Draw(others[i], 8), base);
  }
}

TEST(RandomStreamTest, ManyBlocksDoNotRepeat) {
  std::set<uint64_t> seen;
  for (uint64_t v : Draw(Key(), 10000)) seen.insert(v);
  EXPECT_EQ(seen.size(), 10000u);
}

TEST(RandomStreamTest, Uniform01IsInUnitIntervalWithMeanOneHalf) {
  RandomStream rng(Key());
  constexpr int kDraws = 100000;
  double sum = 0.0;
  for (int i = 0; i < kDraws; ++i) {
    const double u = rng.Uniform01();
    ASSERT_GE(u, 0.0);
    ASSERT_LT(u, 1.0);
    sum += u;
  }
  // Standard error of the mean is sqrt(1/12 / n) = 0.00091; allow 5 of them.
  EXPECT_NEAR(sum / kDraws, 0.5, 0.0046);
}

TEST(RandomStreamTest, UniformStaysInHalfOpenRange) {
  RandomStream rng(Key());
  for (int i = 0; i < 10000; ++i) {
    const double u = rng.Uniform(-2.5, 3.0);
    ASSERT_GE(u, -2.5);
    ASSERT_LT(u, 3.0);
  }
}

TEST(RandomStreamTest, NormalHasMeanZeroAndVarianceOne) {
  RandomStream rng(Key(2024, 0, 0, StreamPurpose::kSeedGenes, 0));
  constexpr int kDraws = 100000;
  double sum = 0.0, sum_sq = 0.0;
  for (int i = 0; i < kDraws; ++i) {
    const double z = rng.Normal();
    sum += z;
    sum_sq += z * z;
  }
  const double mean = sum / kDraws;
  const double var = sum_sq / kDraws - mean * mean;
  // Standard errors: mean 1/sqrt(n) = 0.0032, variance sqrt(2/n) = 0.0045;
  // allow 5.
  EXPECT_NEAR(mean, 0.0, 0.016);
  EXPECT_NEAR(var, 1.0, 0.023);
}

TEST(RandomStreamTest, BelowIsUnbiasedBetweenSmallOutcomes) {
  for (uint64_t n : {2u, 3u, 5u, 7u, 10u}) {
    SCOPED_TRACE(n);
    RandomStream rng(
        Key(7, 0, 0, StreamPurpose::kSelection, static_cast<uint32_t>(n)));
    constexpr int kDraws = 60000;
    std::vector<int> counts(n, 0);
    for (int i = 0; i < kDraws; ++i) {
      const uint64_t v = rng.Below(n);
      ASSERT_LT(v, n);
      ++counts[v];
    }
    const double expected = static_cast<double>(kDraws) / n;
    double chi2 = 0.0;
    for (int c : counts) chi2 += (c - expected) * (c - expected) / expected;
    // Chi-square upper 0.1% points for n-1 = 1..9 degrees of freedom are at
    // most 27.88 (9 d.f.), from memory (standard chi-square table).
    EXPECT_LT(chi2, 27.88);
  }
}

TEST(RandomStreamTest, BelowOneIsAlwaysZero) {
  RandomStream rng(Key());
  for (int i = 0; i < 10; ++i) EXPECT_EQ(rng.Below(1), 0u);
}

TEST(RandomStreamTest, BernoulliMatchesProbability) {
  RandomStream rng(Key());
  constexpr int kDraws = 100000;
  int hits = 0;
  for (int i = 0; i < kDraws; ++i) hits += rng.Bernoulli(0.3) ? 1 : 0;
  // Standard error sqrt(0.21 / n) = 0.00145; allow 5.
  EXPECT_NEAR(static_cast<double>(hits) / kDraws, 0.3, 0.0073);
  EXPECT_FALSE(rng.Bernoulli(0.0));
  EXPECT_TRUE(rng.Bernoulli(1.0));
}

// Philox4x32-10 against Random123's own philox4x32_R(10, ...) (Salmon et al.
// 2011; the authors' reference header) on counters and keys drawn from a
// simple generator: every word of the counter and key is exercised.
TEST(Philox4x32Test, EqualsRandom123ReferenceHeader) {
#ifndef SKERRY_HAVE_RANDOM123
  GTEST_SKIP() << "Random123/philox.h is not installed (Debian package "
                  "librandom123-dev); the known-answer tests above still run";
#else
  uint64_t x = 0x9e3779b97f4a7c15ull;  // splitmix64 as the input source
  auto next = [&x]() {
    x += 0x9e3779b97f4a7c15ull;
    uint64_t z = x;
    z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ull;
    z = (z ^ (z >> 27)) * 0x94d049bb133111ebull;
    return static_cast<uint32_t>(z ^ (z >> 31));
  };
  for (int i = 0; i < 10000; ++i) {
    const Block counter{next(), next(), next(), next()};
    const std::array<uint32_t, 2> key{next(), next()};
    philox4x32_ctr_t c = {{counter[0], counter[1], counter[2], counter[3]}};
    philox4x32_key_t k = {{key[0], key[1]}};
    const philox4x32_ctr_t want = philox4x32_R(10, c, k);
    ASSERT_EQ(Philox4x32_10(counter, key),
              (Block{want.v[0], want.v[1], want.v[2], want.v[3]}))
        << "counter " << counter[0] << "," << counter[1] << "," << counter[2]
        << "," << counter[3] << " key " << key[0] << "," << key[1];
  }
#endif
}

}  // namespace
}  // namespace skerry
