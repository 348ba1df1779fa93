// Tests for the genetic operators (server/engine/operators.h), held against the
// published examples and derivations listed in REFERENCES.md.
#include "server/engine/operators.h"

#include <algorithm>
#include <cmath>
#include <memory>
#include <numeric>
#include <vector>

#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

using skerry::v1::CrossoverSpec;
using skerry::v1::SelectionSpec;

RandomStream Stream(uint32_t slot = 0, uint64_t seed = 1989) {
  StreamKey key;
  key.run_seed = seed;
  key.purpose = StreamPurpose::kSelection;
  key.slot = slot;
  return RandomStream(key);
}

std::vector<int> Counts(const std::vector<int>& picks, int n) {
  std::vector<int> counts(n, 0);
  for (int p : picks) {
    EXPECT_GE(p, 0);
    EXPECT_LT(p, n);
    if (p >= 0 && p < n) ++counts[p];
  }
  return counts;
}

// Goldberg 1989, ch. 1, f(x)=x^2 example: strings 01101, 11000, 01000, 10011.
const std::vector<double> kGoldbergFitness = {169, 576, 64, 361};

std::vector<double> Bits(const char* s) {
  std::vector<double> genes;
  for (; *s != '\0'; ++s) genes.push_back(*s == '1' ? 1.0 : 0.0);
  return genes;
}

TEST(RankBestFirstTest, OrdersByDirectionWithFailuresLastAndTiesByIndex) {
  const std::vector<double> scores = {3, 1, 2, 1, 0};
  const bool valid[] = {true, true, true, true, false};
  EXPECT_EQ(RankBestFirst(scores, valid, /*maximize=*/false),
            (std::vector<int>{1, 3, 2, 0, 4}));
  EXPECT_EQ(RankBestFirst(scores, valid, /*maximize=*/true),
            (std::vector<int>{0, 2, 1, 3, 4}));
}

TEST(RankBestFirstTest, NaNScoreRanksWithTheFailures) {
  const std::vector<double> scores = {std::nan(""), 5, 4};
  const bool valid[] = {true, true, true};
  EXPECT_EQ(RankBestFirst(scores, valid, false), (std::vector<int>{2, 1, 0}));
}

TEST(ScaleFitnessTest, RawKeepsGoldbergFitnessAsWeights) {
  const bool valid[] = {true, true, true, true};
  auto w = ScaleFitness(kGoldbergFitness, valid, true, skerry::v1::RAW, 2.0);
  ASSERT_TRUE(w.ok()) << w.status();
  EXPECT_EQ(*w, kGoldbergFitness);
}

TEST(ScaleFitnessTest, ExpectedCopiesMatchGoldberg) {
  // Goldberg 1989, ch. 1: expected copies 0.58, 1.97, 0.22, 1.23.
  const bool valid[] = {true, true, true, true};
  auto w = ScaleFitness(kGoldbergFitness, valid, true, skerry::v1::RAW, 2.0);
  ASSERT_TRUE(w.ok());
  const double mean = std::accumulate(w->begin(), w->end(), 0.0) / 4;
  const double expected[] = {0.58, 1.97, 0.22, 1.23};
  for (int i = 0; i < 4; ++i)
    EXPECT_NEAR((*w)[i] / mean, expected[i], 0.005) << i;
}

TEST(ScaleFitnessTest, RawRejectsMinimisationAndNegativeScores) {
  const std::vector<double> scores = {1, -2};
  const bool valid[] = {true, true};
  EXPECT_EQ(ScaleFitness(kGoldbergFitness, {true, true, true, true}, false,
                         skerry::v1::RAW, 2.0)
                .status()
                .code(),
            absl::StatusCode::kInvalidArgument);
  auto w = ScaleFitness(scores, valid, true, skerry::v1::RAW, 2.0);
  ASSERT_FALSE(w.ok());
  EXPECT_EQ(w.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_NE(w.status().message().find("-2"), absl::string_view::npos);
}

TEST(ScaleFitnessTest, WindowingHandlesNegativeScoresWhenMinimising) {
  // Windowing: distance from the generation's worst (common practice).
  const std::vector<double> scores = {-5, -1, 3, -100};
  const bool valid[] = {true, true, true, false};
  auto w = ScaleFitness(scores, valid, false, skerry::v1::WINDOWING, 2.0);
  ASSERT_TRUE(w.ok());
  EXPECT_EQ(*w, (std::vector<double>{8, 4, 0, 0}));
  auto m = ScaleFitness(scores, valid, true, skerry::v1::WINDOWING, 2.0);
  ASSERT_TRUE(m.ok());
  EXPECT_EQ(*m, (std::vector<double>{0, 4, 8, 0}));
}

TEST(ScaleFitnessTest, AllEqualOrAllFailedGivesEqualWeights) {
  const std::vector<double> scores = {2, 2, 2};
  const bool valid[] = {true, false, true};
  auto w = ScaleFitness(scores, valid, false, skerry::v1::WINDOWING, 2.0);
  ASSERT_TRUE(w.ok());
  EXPECT_EQ(*w, (std::vector<double>{1, 0, 1}));
  const bool none[] = {false, false, false};
  auto all = ScaleFitness(scores, none, false, skerry::v1::LINEAR, 2.0);
  ASSERT_TRUE(all.ok());
  EXPECT_EQ(*all, (std::vector<double>{1, 1, 1}));
}

TEST(ScaleFitnessTest, LinearScalingKeepsMeanAndMapsBestToFactorTimesMean) {
  // Goldberg 1989, ch. 3 linear scaling: f' = a f + b with f'avg = favg and
  // f'max = C favg. Windowed weights here are {0, 1, 1, 1, 10}: mean 2.6.
  const std::vector<double> scores = {0, 1, 1, 1, 10};
  const bool v[] = {true, true, true, true, true};
  auto w = ScaleFitness(scores, v, true, skerry::v1::LINEAR, 2.0);
  ASSERT_TRUE(w.ok());
  const double mean = std::accumulate(w->begin(), w->end(), 0.0) / 5;
  EXPECT_NEAR(mean, 2.6, 1e-12);
  EXPECT_NEAR(*std::max_element(w->begin(), w->end()), 5.2, 1e-12);
  for (double x : *w) EXPECT_GE(x, 0.0);
}

TEST(ScaleFitnessTest, LinearScalingNeverGoesNegative) {
  // Goldberg 1989, ch. 3: when the worst would go negative, scale so it maps to
  // 0. Windowed {0, 5, 6, 7}: the best is below 2 x mean, so weights stay put.
  const std::vector<double> scores = {10, 5, 4, 3};
  const bool v[] = {true, true, true, true};
  auto w = ScaleFitness(scores, v, false, skerry::v1::LINEAR, 2.0);
  ASSERT_TRUE(w.ok());
  EXPECT_NEAR((*w)[0], 0.0, 1e-12);
  EXPECT_NEAR((*w)[1], 5.0, 1e-12);
  EXPECT_NEAR((*w)[3], 7.0, 1e-12);
}

TEST(SelectRouletteTest, MatchesGoldbergProbabilities) {
  // Goldberg 1989, ch. 1: probabilities 0.1444, 0.4923, 0.0547, 0.3085.
  RandomStream rng = Stream();
  constexpr int kSpins = 200000;
  const std::vector<int> counts =
      Counts(SelectRoulette(kGoldbergFitness, kSpins, rng), 4);
  const double expected[] = {0.1444, 0.4923, 0.0547, 0.3085};
  // Standard error at most sqrt(0.25 / 200000) = 0.0011; allow 4 of them.
  for (int i = 0; i < 4; ++i) {
    EXPECT_NEAR(static_cast<double>(counts[i]) / kSpins, expected[i], 0.0045)
        << i;
  }
}

TEST(SelectRouletteTest, NeverPicksZeroWeight) {
  RandomStream rng = Stream(1);
  const std::vector<double> weights = {0, 3, 0, 1, 0};
  const std::vector<int> counts =
      Counts(SelectRoulette(weights, 10000, rng), 5);
  EXPECT_EQ(counts[0], 0);
  EXPECT_EQ(counts[2], 0);
  EXPECT_EQ(counts[4], 0);
}

TEST(OnePointCrossoverTest, GoldbergSiteFourExample) {
  // Goldberg 1989, ch. 1: 01101 x 11000 crossed at site 4 gives 01100 and
  // 11001.
  std::vector<double> c1, c2;
  OnePointCrossover(Bits("01101"), Bits("11000"), 4, &c1, &c2);
  EXPECT_EQ(c1, Bits("01100"));
  EXPECT_EQ(c2, Bits("11001"));
}

TEST(TwoPointCrossoverTest, SwapsTheSegment) {
  std::vector<double> c1, c2;
  TwoPointCrossover(Bits("00000"), Bits("11111"), 1, 3, &c1, &c2);
  EXPECT_EQ(c1, Bits("01100"));
  EXPECT_EQ(c2, Bits("10011"));
}

TEST(StochasticUniversalTest, BakerPointersOnGoldbergPopulation) {
  // Baker 1987 with first pointer 0 and spacing 1170 / 4 = 292.5 (derived in
  // REFERENCES.md): counts [1, 2, 0, 1].
  EXPECT_EQ(Counts(StochasticUniversalWithOffset(kGoldbergFitness, 4, 0.0), 4),
            (std::vector<int>{1, 2, 0, 1}));
}

TEST(StochasticUniversalTest, CountsAreFloorOrCeilingOfExpectation) {
  // Baker 1987: minimum spread, each count is floor or ceil of expected (from
  // memory).
  for (uint32_t trial = 0; trial < 300; ++trial) {
    SCOPED_TRACE(trial);
    RandomStream rng = Stream(trial, 77);
    const int n = 2 + static_cast<int>(rng.Below(15));
    const int count = 1 + static_cast<int>(rng.Below(40));
    std::vector<double> weights(n);
    for (double& w : weights) w = rng.Bernoulli(0.2) ? 0.0 : rng.Uniform(0, 10);
    weights[rng.Below(n)] = 1.0;  // at least one positive weight
    const double sum = std::accumulate(weights.begin(), weights.end(), 0.0);
    const std::vector<int> counts =
        Counts(SelectStochasticUniversal(weights, count, rng), n);
    ASSERT_EQ(std::accumulate(counts.begin(), counts.end(), 0), count);
    for (int i = 0; i < n; ++i) {
      const double expected = count * weights[i] / sum;
      EXPECT_GE(counts[i], std::floor(expected - 1e-9)) << i;
      EXPECT_LE(counts[i], std::ceil(expected + 1e-9)) << i;
    }
  }
}

TEST(SelectTournamentTest, BinaryTournamentRankProbabilities) {
  // With replacement, P(rank i of N, best = N) = (i^k - (i-1)^k) / N^k
  // (derived, REFERENCES.md): N = 4, k = 2 gives 1/16, 3/16, 5/16, 7/16 from
  // worst to best.
  const std::vector<int> rank_of = {3, 2, 1, 0};  // genome 3 is best
  RandomStream rng = Stream(2);
  constexpr int kDraws = 160000;
  const std::vector<int> counts =
      Counts(SelectTournament(rank_of, 2, kDraws, rng), 4);
  const double expected[] = {1.0 / 16, 3.0 / 16, 5.0 / 16, 7.0 / 16};
  // Standard error at most sqrt(0.25 / 160000) = 0.00125; allow 4 of them.
  for (int i = 0; i < 4; ++i) {
    EXPECT_NEAR(static_cast<double>(counts[i]) / kDraws, expected[i], 0.005)
        << i;
  }
}

TEST(LinearRankTest, ProbabilitiesFollowBakerFormulaAndSumToOne) {
  // Baker 1985: p(r) = (s - (2s - 2) r / (N - 1)) / N.
  for (double s : {1.0, 1.5, 2.0}) {
    for (int n : {1, 2, 5, 100}) {
      SCOPED_TRACE(testing::Message() << "s=" << s << " n=" << n);
      const std::vector<double> p = LinearRankProbabilities(n, s);
      ASSERT_EQ(static_cast<int>(p.size()), n);
      EXPECT_NEAR(std::accumulate(p.begin(), p.end(), 0.0), 1.0, 1e-12);
      for (int r = 0; r < n && n > 1; ++r) {
        EXPECT_NEAR(p[r], (s - (2 * s - 2) * r / (n - 1)) / n, 1e-15);
      }
    }
  }
  const std::vector<double> p5 = LinearRankProbabilities(5, 1.5);
  const std::vector<double> expected = {0.3, 0.25, 0.2, 0.15, 0.1};
  for (int r = 0; r < 5; ++r) EXPECT_NEAR(p5[r], expected[r], 1e-15);
}

TEST(LinearRankTest, SelectionFrequenciesMatchProbabilities) {
  const std::vector<int> order = {4, 2, 0, 1, 3};  // best first
  RandomStream rng = Stream(3);
  constexpr int kDraws = 100000;
  const std::vector<int> counts =
      Counts(SelectLinearRank(order, 1.5, kDraws, rng), 5);
  const std::vector<double> p = LinearRankProbabilities(5, 1.5);
  for (int r = 0; r < 5; ++r) {
    // Standard error at most 0.0016; allow 4 of them.
    EXPECT_NEAR(static_cast<double>(counts[order[r]]) / kDraws, p[r], 0.0064)
        << r;
  }
}

TEST(TruncationTest, PicksOnlyAndAllOfTheTopFraction) {
  std::vector<int> order(10);
  std::iota(order.rbegin(), order.rend(), 0);  // 9 is best
  RandomStream rng = Stream(4);
  const std::vector<int> counts =
      Counts(SelectTruncation(order, 0.3, 3000, rng), 10);
  for (int i = 0; i < 7; ++i) EXPECT_EQ(counts[i], 0) << i;
  for (int i = 7; i < 10; ++i) EXPECT_GT(counts[i], 800) << i;
}

TEST(TruncationTest, FractionThatRoundsUpKeepsCeiling) {
  std::vector<int> order(30);
  std::iota(order.begin(), order.end(), 0);
  RandomStream rng = Stream(5);
  // ceil(0.1 * 30) = 3 even though 0.1 * 30 is 3.0000000000000004 in doubles.
  const std::vector<int> picks = SelectTruncation(order, 0.1, 2000, rng);
  EXPECT_LT(*std::max_element(picks.begin(), picks.end()), 3);
}

SelectionSpec Method(skerry::v1::SelectionMethod m) {
  SelectionSpec spec;
  spec.set_method(m);
  spec.set_scaling(skerry::v1::WINDOWING);
  spec.set_linear_scaling_factor(2.0);
  spec.set_tournament_size(2);
  spec.set_rank_pressure(1.5);
  spec.set_truncation_fraction(0.5);
  return spec;
}

TEST(SelectTest, FailedGenomesAreNeverChosenByProportionateMethods) {
  const std::vector<double> scores = {1, 0, 5, 2, -7};
  const bool valid[] = {true, false, true, true, false};
  for (auto m : {skerry::v1::ROULETTE, skerry::v1::STOCHASTIC_UNIVERSAL}) {
    SCOPED_TRACE(m);
    RandomStream rng = Stream(6);
    auto picks =
        Select(Method(m), scores, valid, /*maximize=*/false, 5000, rng);
    ASSERT_TRUE(picks.ok()) << picks.status();
    const std::vector<int> counts = Counts(*picks, 5);
    EXPECT_EQ(counts[1], 0);
    EXPECT_EQ(counts[4], 0);
    EXPECT_EQ(counts[2], 0);  // the worst valid genome has window weight 0
  }
}

TEST(SelectTest, StochasticUniversalResultIsShuffled) {
  const std::vector<double> scores = {1, 2, 3, 4, 5, 6, 7, 8};
  const bool valid[] = {true, true, true, true, true, true, true, true};
  RandomStream a = Stream(7);
  RandomStream b = Stream(7);
  auto picks = Select(Method(skerry::v1::STOCHASTIC_UNIVERSAL), scores, valid,
                      true, 40, a);
  ASSERT_TRUE(picks.ok());
  auto sw = ScaleFitness(scores, valid, true, skerry::v1::WINDOWING, 2.0);
  std::vector<int> plain = SelectStochasticUniversal(*sw, 40, b);
  std::vector<int> sorted = *picks;
  std::sort(sorted.begin(), sorted.end());
  EXPECT_EQ(sorted, plain);  // same pointers, same counts
  EXPECT_NE(*picks, plain);  // but not in wheel order
}

TEST(SelectTest, SameStreamGivesSameParents) {
  const std::vector<double> scores = {4, 2, 9, 1, 3, 3};
  const bool valid[] = {true, true, true, true, true, true};
  for (auto m : {skerry::v1::ROULETTE, skerry::v1::STOCHASTIC_UNIVERSAL,
                 skerry::v1::TOURNAMENT, skerry::v1::LINEAR_RANK,
                 skerry::v1::TRUNCATION}) {
    SCOPED_TRACE(m);
    RandomStream a = Stream(8);
    RandomStream b = Stream(8);
    auto x = Select(Method(m), scores, valid, false, 12, a);
    auto y = Select(Method(m), scores, valid, false, 12, b);
    ASSERT_TRUE(x.ok());
    ASSERT_TRUE(y.ok());
    EXPECT_EQ(*x, *y);
    EXPECT_EQ(x->size(), 12u);
  }
}

TEST(SelectTest, RejectsBadArguments) {
  const std::vector<double> scores = {1, 2};
  const bool valid[] = {true, true};
  RandomStream rng = Stream();
  EXPECT_FALSE(Select(Method(skerry::v1::SELECTION_UNSPECIFIED), scores, valid,
                      false, 2, rng)
                   .ok());
  EXPECT_FALSE(
      Select(Method(skerry::v1::TOURNAMENT), scores, valid, false, -1, rng)
          .ok());
  EXPECT_FALSE(
      Select(Method(skerry::v1::TOURNAMENT), {}, {}, false, 1, rng).ok());
  const bool one[] = {true};
  EXPECT_FALSE(
      Select(Method(skerry::v1::TOURNAMENT), scores, one, false, 1, rng).ok());
  SelectionSpec raw = Method(skerry::v1::ROULETTE);
  raw.set_scaling(skerry::v1::RAW);
  EXPECT_FALSE(Select(raw, scores, valid, /*maximize=*/false, 2, rng).ok());
}

// Empirical selection intensity (mean of the selected, in population standard
// deviations) on a large normal population.
double Intensity(const SelectionSpec& spec, uint32_t slot) {
  constexpr int kN = 20000;
  RandomStream rng = Stream(slot, 1995);
  std::vector<double> scores(kN);
  for (double& s : scores) s = rng.Normal();
  const std::unique_ptr<bool[]> valid(new bool[kN]);
  std::fill(valid.get(), valid.get() + kN, true);
  auto picks =
      Select(spec, scores, absl::MakeConstSpan(valid.get(), kN), true, kN, rng);
  EXPECT_TRUE(picks.ok());
  double mean = 0, var = 0, selected = 0;
  for (double s : scores) mean += s / kN;
  for (double s : scores) var += (s - mean) * (s - mean) / kN;
  for (int p : *picks) selected += scores[p] / kN;
  return (selected - mean) / std::sqrt(var);
}

TEST(SelectionIntensityTest, BinaryTournamentIsOneOverRootPi) {
  // Blickle & Thiele 1995: tournament k=2 has intensity 1/sqrt(pi) = 0.5642.
  EXPECT_NEAR(Intensity(Method(skerry::v1::TOURNAMENT), 10), 0.5642, 0.03);
}

TEST(SelectionIntensityTest, TruncationHalfIsRootTwoOverPi) {
  // Blickle & Thiele 1995: truncation T=0.5 has intensity 0.7979.
  EXPECT_NEAR(Intensity(Method(skerry::v1::TRUNCATION), 11), 0.7979, 0.03);
}

// Generations until pure tournament selection (no variation) fills a population
// of n with copies of one best genome; runs where the best is lost are skipped.
double MeanTakeover(int n, uint32_t runs) {
  const SelectionSpec spec = Method(skerry::v1::TOURNAMENT);
  const std::unique_ptr<bool[]> valid(new bool[n]);
  std::fill(valid.get(), valid.get() + n, true);
  double total = 0;
  int kept = 0;
  for (uint32_t run = 0; run < runs; ++run) {
    std::vector<double> scores(n, 0.0);
    scores[0] = 1.0;
    int best = 1;
    for (uint32_t gen = 1; gen <= 200 && best > 0 && best < n; ++gen) {
      StreamKey key;
      key.run_seed = 1991;
      key.generation = gen;
      key.slot = run;
      RandomStream rng(key);
      auto picks = Select(spec, scores, absl::MakeConstSpan(valid.get(), n),
                          true, n, rng);
      EXPECT_TRUE(picks.ok());
      std::vector<double> next(n);
      for (int i = 0; i < n; ++i) next[i] = scores[(*picks)[i]];
      scores = next;
      best = static_cast<int>(std::count(scores.begin(), scores.end(), 1.0));
      if (best == n) {
        total += gen;
        ++kept;
      }
    }
  }
  EXPECT_GT(kept, 0);
  return kept > 0 ? total / kept : 0;
}

TEST(TakeoverTimeTest, BinaryTournamentNearGoldbergDebEstimate) {
  // Goldberg & Deb 1991: t* = (ln n + ln ln n) / ln s, from memory; n=100, s=2
  // gives 8.85 (derived, REFERENCES.md). The formula is an approximation, so
  // the tolerance is loose.
  const double t = MeanTakeover(100, 200);
  EXPECT_NEAR(t, 8.85, 1.5);
}

TEST(CrossoverTest, RateZeroCopiesParentA) {
  CrossoverSpec spec;
  spec.set_method(skerry::v1::UNIFORM);
  spec.set_rate(0.0);
  RandomStream rng = Stream();
  const std::vector<double> a = {1, 2, 3}, b = {4, 5, 6};
  EXPECT_EQ(Crossover(spec, a, b, -10, 10, rng), a);
}

TEST(CrossoverTest, UniformTakesEachGeneFromAParentAboutHalfTheTime) {
  CrossoverSpec spec;
  spec.set_method(skerry::v1::UNIFORM);
  spec.set_rate(1.0);
  RandomStream rng = Stream(12);
  const std::vector<double> a(2000, 0.0), b(2000, 1.0);
  const std::vector<double> child = Crossover(spec, a, b, 0, 1, rng);
  const double from_b = std::accumulate(child.begin(), child.end(), 0.0);
  for (double g : child) EXPECT_TRUE(g == 0.0 || g == 1.0);
  // Standard error sqrt(2000 / 4) = 22.4; allow 5 of them.
  EXPECT_NEAR(from_b, 1000, 112);
}

TEST(CrossoverTest, OneAndTwoPointChildrenAreParentSegments) {
  const std::vector<double> a(12, 0.0), b(12, 1.0);
  for (auto m : {skerry::v1::ONE_POINT, skerry::v1::TWO_POINT}) {
    SCOPED_TRACE(m);
    CrossoverSpec spec;
    spec.set_method(m);
    spec.set_rate(1.0);
    for (uint32_t t = 0; t < 200; ++t) {
      RandomStream rng = Stream(100 + t);
      const std::vector<double> child = Crossover(spec, a, b, 0, 1, rng);
      ASSERT_EQ(child.size(), 12u);
      int switches = 0;
      for (size_t i = 1; i < child.size(); ++i)
        switches += child[i] != child[i - 1];
      if (m == skerry::v1::ONE_POINT) {
        EXPECT_EQ(child.front(), 0.0);  // head of a
        EXPECT_EQ(child.back(), 1.0);   // tail of b
        EXPECT_EQ(switches, 1);
      } else {
        EXPECT_LE(switches, 2);
        EXPECT_GT(std::accumulate(child.begin(), child.end(), 0.0), 0.0);
      }
    }
  }
}

TEST(CrossoverTest, BlendStaysInBoundsAndBetweenParentsWithoutAlpha) {
  const std::vector<double> a = {-0.9, 0.5, 0.95, 0.0};
  const std::vector<double> b = {0.9, -0.5, 1.0, 0.0};
  for (double alpha : {0.0, 0.5, 1.0}) {
    SCOPED_TRACE(alpha);
    CrossoverSpec spec;
    spec.set_method(skerry::v1::BLEND);
    spec.set_rate(1.0);
    spec.set_blend_alpha(alpha);
    for (uint32_t t = 0; t < 300; ++t) {
      RandomStream rng = Stream(1000 + t);
      const std::vector<double> child = Crossover(spec, a, b, -1.0, 1.0, rng);
      for (size_t i = 0; i < child.size(); ++i) {
        EXPECT_GE(child[i], -1.0);
        EXPECT_LE(child[i], 1.0);
        if (alpha == 0.0) {
          EXPECT_GE(child[i], std::min(a[i], b[i]));
          EXPECT_LE(child[i], std::max(a[i], b[i]));
        }
      }
    }
  }
}

TEST(MutateTest, ChangesAboutRateTimesLengthGenes) {
  RandomStream rng = Stream(13);
  std::vector<double> genes(10000, 0.0);
  const int changed = Mutate(0.1, 0.5, -5, 5, &genes, rng);
  // Binomial(10000, 0.1): standard deviation 30; allow 5 of them.
  EXPECT_NEAR(changed, 1000, 150);
  const int nonzero = static_cast<int>(std::count_if(
      genes.begin(), genes.end(), [](double g) { return g != 0.0; }));
  EXPECT_EQ(nonzero, changed);
}

TEST(MutateTest, ClampsToBounds) {
  RandomStream rng = Stream(14);
  std::vector<double> genes(1000, 0.9);
  Mutate(1.0, 10.0, -1.0, 1.0, &genes, rng);
  int at_bound = 0;
  for (double g : genes) {
    EXPECT_GE(g, -1.0);
    EXPECT_LE(g, 1.0);
    at_bound += (g == 1.0 || g == -1.0);
  }
  EXPECT_GT(at_bound, 800);  // a step of 10 almost always leaves [-1, 1]
}

TEST(MutateTest, RateZeroChangesNothing) {
  RandomStream rng = Stream(15);
  std::vector<double> genes = {0.1, 0.2, 0.3};
  EXPECT_EQ(Mutate(0.0, 1.0, -1, 1, &genes, rng), 0);
  EXPECT_EQ(genes, (std::vector<double>{0.1, 0.2, 0.3}));
}

}  // namespace
}  // namespace skerry::engine
