// The pure parts of `skerry submit --seeds`, `skerry list` grouping and
// `skerry compare` (cli/series.h, cli/compare.h).
#include "absl/time/time.h"
#include "cli/compare.h"
#include "cli/series.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::cli {
namespace {

using ::testing::ElementsAre;
using ::testing::HasSubstr;

TEST(SeedListTest, RangesAndListsKeepTheirOrder) {
  EXPECT_THAT(*ParseSeedList("1-4"), ElementsAre(1, 2, 3, 4));
  EXPECT_THAT(*ParseSeedList("9,1,3-5"), ElementsAre(9, 1, 3, 4, 5));
  EXPECT_THAT(*ParseSeedList(" 0 "), ElementsAre(0));
  EXPECT_EQ(ParseSeedList("1-100")->size(), 100u);
}

TEST(SeedListTest, BadListsAreRefusedNamingTheOptionAndTheItem) {
  struct Case {
    const char* text;
    const char* says;
  } cases[] = {
      {"", "--seeds: empty"},
      {"1,,2", "has an empty item"},
      {"a", "--seeds: 'a' is not a seed"},
      {"-3", "'-3' is not a seed"},
      {"5-2", "'5-2' runs backwards"},
      {"1-2-3", "not a seed or a range"},
      {"1-101", "more than 100 seeds"},
      {"1-60,61-120", "more than 100 seeds"},
      {"1-3,2", "repeats seed 2"},
      {"99999999999999999999999", "is not a seed"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<std::vector<uint64_t>> s = ParseSeedList(c.text);
    ASSERT_FALSE(s.ok());
    EXPECT_TRUE(absl::IsInvalidArgument(s.status()));
    EXPECT_THAT(std::string(s.status().message()), HasSubstr(c.says));
    EXPECT_THAT(std::string(s.status().message()), HasSubstr("--seeds"));
  }
}

TEST(CheckpointsTest, IncreasingListIsParsedAndOthersRefused) {
  EXPECT_THAT(*ParseCheckpoints("100,250,1000"), ElementsAre(100, 250, 1000));
  EXPECT_THAT(std::string(ParseCheckpoints("100,50").status().message()),
              HasSubstr("--at: checkpoints go in increasing order"));
  EXPECT_THAT(std::string(ParseCheckpoints("0").status().message()),
              HasSubstr("--at: '0' is not a number of evaluations"));
  EXPECT_THAT(
      std::string(ParseCheckpoints("1,2,3,4,5,6,7,8,9,10,11,12,13,14,15,16,"
                                   "17,18,19,20,21")
                      .status()
                      .message()),
      HasSubstr("at most 20 checkpoints"));
}

skerry::v1::GenerationStats Gen(uint32_t island, uint32_t generation,
                                double best, uint32_t evaluations,
                                uint32_t failed = 0) {
  skerry::v1::GenerationStats g;
  g.set_island(island);
  g.set_generation(generation);
  g.set_best(best);
  g.set_evaluations(evaluations);
  g.set_failed(failed);
  return g;
}

TEST(BestCurveTest, EvaluationsAddUpAcrossIslandsInGenerationOrder) {
  // History comes island by island; the curve goes generation by generation.
  std::vector<skerry::v1::GenerationStats> history = {
      Gen(0, 0, 5.0, 10), Gen(0, 1, 3.0, 9), Gen(1, 0, 4.0, 10),
      Gen(1, 1, 6.0, 9, 9)};  // island 1, generation 1: every one failed
  BestCurve c = MakeBestCurve(history, skerry::v1::MINIMIZE);
  ASSERT_EQ(c.size(), 4u);
  EXPECT_EQ(c[0], std::make_pair(uint64_t{10}, 5.0));
  EXPECT_EQ(c[1], std::make_pair(uint64_t{20}, 4.0));
  EXPECT_EQ(c[2], std::make_pair(uint64_t{29}, 3.0));
  EXPECT_EQ(c[3], std::make_pair(uint64_t{38}, 3.0));
  EXPECT_FALSE(BestAt(c, 5).has_value());  // no generation complete yet
  EXPECT_EQ(*BestAt(c, 25), 4.0);
  EXPECT_EQ(*BestAt(c, 38), 3.0);
  EXPECT_FALSE(BestAt(c, 39).has_value());  // the run never got there
  BestCurve up = MakeBestCurve(history, skerry::v1::MAXIMIZE);
  EXPECT_EQ(up.back().second, 5.0);
}

TEST(GroupedListTest, SeriesRunsAreListedUnderTheirName) {
  std::vector<skerry::v1::RunSummary> runs(3);
  runs[0].set_id(1);
  runs[0].set_name("alone");
  runs[1].set_id(2);
  runs[1].set_series("low");
  runs[2].set_id(3);
  runs[2].set_series("low");
  const std::string text = FormatGroupedRunList(runs, absl::UTCTimeZone());
  EXPECT_THAT(text, HasSubstr("alone"));
  EXPECT_THAT(text, HasSubstr("series low (2 runs)"));
  EXPECT_LT(text.find("alone"), text.find("series low"));
  EXPECT_EQ(SeriesRuns(runs, "low").size(), 2u);
  EXPECT_TRUE(SeriesRuns(runs, "high").empty());
}

}  // namespace
}  // namespace skerry::cli
