// The Mann-Whitney U rank-sum test and quantiles (common/rank_sum.h) against
// a handbook table, values derived by hand from the definition, and SciPy.
#include "common/rank_sum.h"

#include <cstdio>
#include <sstream>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "absl/strings/str_split.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using ::testing::HasSubstr;

// Derived from the definition: for n1 = n2 = 3 there are C(6,3) = 20
// arrangements, and U = 0 (every x below every y) is one of them, as is
// U = 9; U = 1 is one more. [D]
TEST(RankSumTest, SmallNullDistributionMatchesCounting) {
  EXPECT_DOUBLE_EQ(ExactUCdf(3, 3, 0), 1.0 / 20);
  EXPECT_DOUBLE_EQ(ExactUCdf(3, 3, 1), 2.0 / 20);
  EXPECT_DOUBLE_EQ(ExactUCdf(3, 3, 9), 1.0);
  // n1 = 1: U is uniform on 0..n2. [D]
  EXPECT_DOUBLE_EQ(ExactUCdf(1, 4, 2), 3.0 / 5);
  EXPECT_DOUBLE_EQ(ExactUCdf(4, 1, 2), 3.0 / 5);
}

TEST(RankSumTest, SeparatedSamplesGiveTheSmallestExactP) {
  absl::StatusOr<RankSumTest> t = MannWhitneyU({1, 2, 3}, {4, 5, 6});
  ASSERT_TRUE(t.ok()) << t.status();
  EXPECT_TRUE(t->exact);
  EXPECT_EQ(t->u1, 0);
  EXPECT_EQ(t->u2, 9);
  EXPECT_DOUBLE_EQ(t->p_value, 2.0 / 20);  // [D] both tails of 1/20
  EXPECT_THAT(t->method, HasSubstr("exact"));
}

// Critical values of U for a two-sided test at alpha = 0.05 (the largest U
// whose two-sided p is at most 0.05), as printed in the usual handbook
// tables of the Mann-Whitney test, e.g. Siegel & Castellan, "Nonparametric
// Statistics for the Behavioral Sciences" (2nd ed., 1988), Table J
// -- from memory: n1 = n2 = 5: 2; n1 = n2 = 8: 13; n1 = n2 = 10: 23;
// n1 = 6, n2 = 9: 10; n1 = n2 = 20: 127.
TEST(RankSumTest, ExactPAgreesWithHandbookCriticalValues) {
  struct Row {
    size_t n1, n2;
    int critical;
  } rows[] = {{5, 5, 2}, {8, 8, 13}, {10, 10, 23}, {6, 9, 10}, {20, 20, 127}};
  for (const Row& r : rows) {
    SCOPED_TRACE(absl::StrCat(r.n1, " x ", r.n2));
    EXPECT_LE(2 * ExactUCdf(r.n1, r.n2, r.critical), 0.05);
    EXPECT_GT(2 * ExactUCdf(r.n1, r.n2, r.critical + 1), 0.05);
  }
}

TEST(RankSumTest, TiesUseTheNormalApproximation) {
  absl::StatusOr<RankSumTest> t = MannWhitneyU({1, 2, 2, 3}, {2, 3, 4, 5});
  ASSERT_TRUE(t.ok()) << t.status();
  EXPECT_FALSE(t->exact);
  EXPECT_TRUE(t->ties);
  EXPECT_THAT(t->method, HasSubstr("tie and continuity correction"));
  EXPECT_DOUBLE_EQ(t->u1 + t->u2, 16);
  // Every value equal: no evidence, p = 1.
  absl::StatusOr<RankSumTest> same = MannWhitneyU({3, 3}, {3, 3, 3});
  ASSERT_TRUE(same.ok());
  EXPECT_EQ(same->p_value, 1);
}

TEST(RankSumTest, EmptyOrNanSampleIsRefusedByName) {
  EXPECT_THAT(std::string(MannWhitneyU({}, {1.0}).status().message()),
              HasSubstr("two non-empty samples"));
  EXPECT_THAT(std::string(MannWhitneyU({1.0, NAN}, {1.0}).status().message()),
              HasSubstr("NaN"));
}

// Hyndman & Fan 1996, definition 7, worked by hand [D]: for 1, 2, 3, 4,
// h = 3p: the quartiles are 1.75 and 3.25 and the median 2.5.
TEST(RankSumTest, QuantilesFollowDefinitionSeven) {
  EXPECT_DOUBLE_EQ(Quantile({4, 1, 3, 2}, 0.25), 1.75);
  EXPECT_DOUBLE_EQ(Quantile({4, 1, 3, 2}, 0.5), 2.5);
  EXPECT_DOUBLE_EQ(Quantile({4, 1, 3, 2}, 0.75), 3.25);
  EXPECT_DOUBLE_EQ(Quantile({7}, 0.25), 7);
}

// The same samples through scipy.stats.mannwhitneyu (Debian's python3-scipy,
// run by /usr/bin/python3) and numpy.percentile: U of the first sample and
// the two-sided p, method "exact" where ours is exact, else "asymptotic"
// with the continuity correction.
TEST(RankSumTest, AgreesWithScipy) {
  if (std::system("/usr/bin/python3 -c 'import scipy.stats' 2>/dev/null") !=
      0) {
    GTEST_SKIP() << "scipy is not installed for /usr/bin/python3 (Debian "
                    "package python3-scipy; deploy/install-deps.sh installs "
                    "it): the comparison with SciPy is skipped";
  }
  const std::vector<std::pair<std::vector<double>, std::vector<double>>> cases =
      {
          {{0.8, 1.9, 3.1, 4.4, 5.2}, {2.5, 6.1, 7.3, 8.0, 9.9}},
          {{1, 2, 3}, {4, 5, 6}},
          {{12.5, 3.25, 7.0, 9.75, 1.5, 8.0, 2.0},
           {4.5, 6.25, 11.0, 13.5, 10.25, 15.0}},
          {{1, 2, 2, 3, 3, 3}, {2, 3, 4, 4, 5}},
          {{0.1, 0.4, 0.4, 0.9}, {0.2, 0.4, 0.8, 1.2, 1.3}},
      };
  // 60 against 55 distinct values: past the exact bound, the normal
  // approximation without ties.
  std::vector<double> big_x, big_y;
  for (int i = 0; i < 60; ++i) big_x.push_back(i * 1.37 + (i % 7) * 0.11);
  for (int i = 0; i < 55; ++i) big_y.push_back(i * 1.51 + (i % 5) * 0.13 + 3);
  auto all = cases;
  all.emplace_back(big_x, big_y);
  for (const auto& [x, y] : all) {
    absl::StatusOr<RankSumTest> ours = MannWhitneyU(x, y);
    ASSERT_TRUE(ours.ok()) << ours.status();
    const std::string script = absl::StrCat(
        "import numpy, scipy.stats as s\n"
        "x=[",
        absl::StrJoin(x, ","), "]\ny=[", absl::StrJoin(y, ","), "]\n",
        "r=s.mannwhitneyu(x,y,alternative='two-sided',use_continuity=True,"
        "method='",
        ours->exact ? "exact" : "asymptotic",
        "')\n"
        "print(repr(float(r.statistic)), repr(float(r.pvalue)), "
        "repr(float(numpy.percentile(x,25))), "
        "repr(float(numpy.percentile(x,50))), "
        "repr(float(numpy.percentile(x,75))))\n");
    const std::string path = ::testing::TempDir() + "/rank_sum_check.py";
    FILE* f = std::fopen(path.c_str(), "w");
    ASSERT_NE(f, nullptr);
    std::fputs(script.c_str(), f);
    std::fclose(f);
    FILE* p = popen(("/usr/bin/python3 " + path).c_str(), "r");
    ASSERT_NE(p, nullptr);
    char buf[512] = {0};
    std::string out;
    while (std::fgets(buf, sizeof(buf), p) != nullptr) out += buf;
    ASSERT_EQ(pclose(p), 0) << out;
    std::istringstream in(out);
    double u = 0, pv = 0, q1 = 0, q2 = 0, q3 = 0;
    in >> u >> pv >> q1 >> q2 >> q3;
    SCOPED_TRACE(script);
    EXPECT_DOUBLE_EQ(ours->u1, u);
    EXPECT_NEAR(ours->p_value, pv, 1e-12 + 1e-9 * pv);
    EXPECT_NEAR(Quantile(x, 0.25), q1, 1e-12);
    EXPECT_NEAR(Quantile(x, 0.5), q2, 1e-12);
    EXPECT_NEAR(Quantile(x, 0.75), q3, 1e-12);
  }
}

}  // namespace
}  // namespace skerry
