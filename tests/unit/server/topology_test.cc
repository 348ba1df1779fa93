// Tests for the migration topologies (server/engine/topology.h): the neighbour
// sets of every topology for 1 to 8 islands, Sources as the inverse of
// Destinations, and which generations are migration epochs.
#include "server/engine/topology.h"

#include <algorithm>
#include <set>
#include <vector>

#include "absl/strings/str_cat.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using ::testing::ElementsAre;
using ::testing::ElementsAreArray;
using ::testing::IsEmpty;

RunSpec Islands(uint32_t count, skerry::v1::Topology topology,
                uint32_t random_degree = 1, uint64_t seed = 5) {
  RunSpec spec;
  spec.set_seed(seed);
  auto* isl = spec.mutable_islands();
  isl->set_count(count);
  isl->set_topology(topology);
  isl->set_interval(4);
  isl->set_migrants(1);
  isl->set_random_degree(random_degree);
  return spec;
}

bool IsSortedUnique(const std::vector<uint32_t>& v) {
  for (size_t i = 1; i < v.size(); ++i) {
    if (v[i - 1] >= v[i]) return false;
  }
  return true;
}

// Ring definitions: common practice (island i sends to its successor; the
// two-way ring adds its predecessor).
TEST(TopologyTest, RingSendsToTheNextIsland) {
  for (uint32_t n = 1; n <= 8; ++n) {
    const RunSpec spec = Islands(n, skerry::v1::RING);
    for (uint32_t i = 0; i < n; ++i) {
      SCOPED_TRACE(absl::StrCat("n=", n, " island ", i));
      if (n == 1) {
        EXPECT_THAT(Destinations(spec, i, 4), IsEmpty());
      } else {
        EXPECT_THAT(Destinations(spec, i, 4), ElementsAre((i + 1) % n));
      }
    }
  }
}

TEST(TopologyTest, TwoWayRingSendsToBothNeighboursWithoutDuplicates) {
  for (uint32_t n = 1; n <= 8; ++n) {
    const RunSpec spec = Islands(n, skerry::v1::TWO_WAY_RING);
    for (uint32_t i = 0; i < n; ++i) {
      SCOPED_TRACE(absl::StrCat("n=", n, " island ", i));
      std::set<uint32_t> want;
      if (n > 1) {
        want.insert((i + 1) % n);
        want.insert((i + n - 1) % n);
      }
      const std::vector<uint32_t> got = Destinations(spec, i, 4);
      EXPECT_THAT(got, ElementsAreArray(want));
      if (n == 2) {
        EXPECT_THAT(got, ElementsAre(1 - i));
      }
    }
  }
}

TEST(TopologyTest, FullyConnectedSendsToEveryOtherIsland) {
  for (uint32_t n = 1; n <= 8; ++n) {
    const RunSpec spec = Islands(n, skerry::v1::FULLY_CONNECTED);
    for (uint32_t i = 0; i < n; ++i) {
      SCOPED_TRACE(absl::StrCat("n=", n, " island ", i));
      std::vector<uint32_t> want;
      for (uint32_t j = 0; j < n; ++j) {
        if (j != i) want.push_back(j);
      }
      EXPECT_THAT(Destinations(spec, i, 4), ElementsAreArray(want));
    }
  }
}

TEST(TopologyTest, RandomSendsToKDistinctOthersNeverItself) {
  for (uint32_t n = 1; n <= 8; ++n) {
    for (uint32_t k = 1; k + 1 <= std::max<uint32_t>(n, 2); ++k) {
      const RunSpec spec = Islands(n, skerry::v1::RANDOM, k);
      for (uint32_t g = 4; g <= 40; g += 4) {
        for (uint32_t i = 0; i < n; ++i) {
          SCOPED_TRACE(
              absl::StrCat("n=", n, " k=", k, " g=", g, " island ", i));
          const std::vector<uint32_t> got = Destinations(spec, i, g);
          EXPECT_EQ(got.size(), n == 1 ? 0u : k);
          EXPECT_TRUE(IsSortedUnique(got));
          for (uint32_t d : got) {
            EXPECT_NE(d, i);
            EXPECT_LT(d, n);
          }
        }
      }
    }
  }
}

TEST(TopologyTest, RandomIsTheSameForTheSameSeedAndGeneration) {
  const RunSpec a = Islands(8, skerry::v1::RANDOM, 3, /*seed=*/99);
  const RunSpec b = Islands(8, skerry::v1::RANDOM, 3, /*seed=*/99);
  for (uint32_t g = 4; g <= 40; g += 4) {
    for (uint32_t i = 0; i < 8; ++i) {
      EXPECT_EQ(Destinations(a, i, g), Destinations(b, i, g));
    }
  }
}

TEST(TopologyTest, RandomChangesAcrossGenerationsAndSeeds) {
  const RunSpec spec = Islands(8, skerry::v1::RANDOM, 2, /*seed=*/99);
  std::set<std::vector<uint32_t>> across_generations;
  for (uint32_t g = 4; g <= 200; g += 4) {
    across_generations.insert(Destinations(spec, 0, g));
  }
  EXPECT_GT(across_generations.size(), 1u);

  std::set<std::vector<uint32_t>> across_seeds;
  for (uint64_t seed = 1; seed <= 50; ++seed) {
    across_seeds.insert(
        Destinations(Islands(8, skerry::v1::RANDOM, 2, seed), 0, 4));
  }
  EXPECT_GT(across_seeds.size(), 1u);
}

TEST(TopologyTest, SourcesIsTheInverseOfDestinations) {
  for (skerry::v1::Topology t :
       {skerry::v1::RING, skerry::v1::TWO_WAY_RING, skerry::v1::FULLY_CONNECTED,
        skerry::v1::RANDOM}) {
    for (uint32_t n = 1; n <= 8; ++n) {
      const RunSpec spec = Islands(n, t, n > 2 ? 2 : 1);
      for (uint32_t g : {4u, 8u, 12u}) {
        for (uint32_t i = 0; i < n; ++i) {
          SCOPED_TRACE(absl::StrCat(skerry::v1::Topology_Name(t), " n=", n,
                                    " g=", g, " island ", i));
          const std::vector<uint32_t> sources = Sources(spec, i, g);
          EXPECT_TRUE(IsSortedUnique(sources));
          for (uint32_t j = 0; j < n; ++j) {
            const std::vector<uint32_t> d = Destinations(spec, j, g);
            const bool sends = std::find(d.begin(), d.end(), i) != d.end();
            const bool listed =
                std::find(sources.begin(), sources.end(), j) != sources.end();
            EXPECT_EQ(sends, listed) << "island " << j;
          }
        }
      }
    }
  }
}

TEST(TopologyTest, EpochsOnlyAtPositiveMultiplesOfTheInterval) {
  RunSpec spec = Islands(3, skerry::v1::RING);
  spec.mutable_islands()->set_interval(4);
  for (uint32_t g = 0; g <= 25; ++g) {
    SCOPED_TRACE(absl::StrCat("generation ", g));
    EXPECT_EQ(IsMigrationEpoch(spec, g), g > 0 && g % 4 == 0);
  }
  spec.mutable_islands()->set_interval(1);
  EXPECT_FALSE(IsMigrationEpoch(spec, 0));
  for (uint32_t g = 1; g <= 5; ++g) EXPECT_TRUE(IsMigrationEpoch(spec, g));
}

TEST(TopologyTest, NoEpochWithOneIsland) {
  RunSpec spec = Islands(1, skerry::v1::FULLY_CONNECTED);
  spec.mutable_islands()->set_interval(1);
  for (uint32_t g = 0; g <= 20; ++g) EXPECT_FALSE(IsMigrationEpoch(spec, g));
  EXPECT_THAT(Sources(spec, 0, 4), IsEmpty());
}

TEST(TopologyTest, NoEpochWithoutMigrantsOrInterval) {
  RunSpec spec = Islands(4, skerry::v1::RING);
  spec.mutable_islands()->set_migrants(0);
  EXPECT_FALSE(IsMigrationEpoch(spec, 4));
  spec.mutable_islands()->set_migrants(1);
  spec.mutable_islands()->set_interval(0);
  EXPECT_FALSE(IsMigrationEpoch(spec, 4));
}

}  // namespace
}  // namespace skerry::engine
