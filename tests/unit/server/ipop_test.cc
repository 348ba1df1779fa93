// IPOP-CMA-ES (server/engine/cma_strategy.cc; Auger & Hansen 2005, "A restart
// CMA evolution strategy with increasing population size", CEC 2005): the
// population sequence across restarts, the tutorial's parameters for each new
// population, updates spread over generations of population_size genomes,
// saving and restoring mid-update, the spec's defaults and errors, and
// Rastrigin in 10 dimensions.
#include <algorithm>
#include <cmath>
#include <memory>
#include <vector>

#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/strategy_spec.h"
#include "gtest/gtest.h"
#include "server/engine/cma_es.h"
#include "server/engine/strategy.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using store::GenomeRecord;

RunSpec IpopSpec(const std::string& text) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(text, "ipop.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : RunSpec();
}

// Two genes, a flat function: every search ends by EqualFunValues (or
// another criterion) after a few dozen updates, so restarts come quickly.
constexpr char kFlat[] = R"(
seed: 17
genome_length: 2
evaluator { builtin { function: "sphere" } }
strategy { cma_es { population_size: 4 ipop { max_increases: 3 } } }
)";

// Every genome scored `score` (or by f when given).
std::vector<GenomeRecord> Scored(std::vector<GenomeRecord> gen,
                                 double (*f)(const std::vector<double>&)) {
  for (GenomeRecord& g : gen) {
    g.state = skerry::v1::EVALUATED;
    g.score = f == nullptr ? 1.0 : f(g.genes);
    g.attempts = 1;
  }
  return gen;
}

struct Step {
  uint32_t restarts;
  uint32_t lambda;
  uint32_t iteration;
};

// Drives a strategy with a flat score for `generations` generations and
// records (restarts, lambda, iteration) after each Tell.
std::vector<Step> FlatRun(const RunSpec& spec, int generations) {
  std::vector<Step> steps;
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  EXPECT_TRUE(s.ok());
  if (!s.ok()) return steps;
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
  for (int g = 0; g < generations && gen.ok(); ++g) {
    // population_size samples after the distribution genome.
    EXPECT_EQ(gen->size(), 5u) << "generation " << g;
    EXPECT_TRUE((*s)->Tell(Scored(*gen, nullptr), {}).ok());
    const skerry::v1::StrategyState saved = (*s)->Save();
    const skerry::v1::CmaStrategyState& c = saved.cma_es();
    steps.push_back(
        {c.restarts(), c.search().lambda(), c.search().iteration()});
    gen = (*s)->Ask();
  }
  EXPECT_TRUE(gen.ok());
  return steps;
}

// lambda_k = lambda_0 x 2^k (Auger & Hansen 2005: the population doubles at
// each restart), up to max_increases, then kept.
TEST(IpopTest, PopulationDoublesAtEachRestartUpToMaxIncreases) {
  const std::vector<Step> steps = FlatRun(IpopSpec(kFlat), 1500);
  std::vector<uint32_t> seen;  // lambda at restart 0, 1, 2, ...
  for (const Step& s : steps) {
    if (s.restarts == seen.size()) seen.push_back(s.lambda);
    EXPECT_EQ(s.lambda, 4u << std::min(s.restarts, 3u));
  }
  ASSERT_GE(seen.size(), 6u) << "fewer restarts than the test needs";
  EXPECT_EQ(seen[0], 4u);
  EXPECT_EQ(seen[1], 8u);
  EXPECT_EQ(seen[2], 16u);
  EXPECT_EQ(seen[3], 32u);
  EXPECT_EQ(seen[4], 32u);  // max_increases 3
  EXPECT_EQ(seen[5], 32u);
}

// Without ipop a restart keeps the population.
TEST(IpopTest, PlainRestartsKeepThePopulation) {
  std::string text = kFlat;
  text.replace(text.find(" ipop { max_increases: 3 }"), 26, "");
  const std::vector<Step> steps = FlatRun(IpopSpec(text), 300);
  ASSERT_GE(steps.back().restarts, 2u);
  for (const Step& s : steps) EXPECT_EQ(s.lambda, 4u);
}

// An update of a search with lambda samples spans lambda / 4 generations of
// 4: the iteration count rises once per lambda / 4 Tells, never by more
// than one.
TEST(IpopTest, AnUpdateSpansLambdaOverPopulationSizeGenerations) {
  const std::vector<Step> steps = FlatRun(IpopSpec(kFlat), 1500);
  for (uint32_t lambda : {4u, 8u, 16u, 32u}) {
    SCOPED_TRACE(lambda);
    int tells = 0, updates = 0;
    for (size_t i = 1; i < steps.size(); ++i) {
      if (steps[i].lambda != lambda ||
          steps[i].restarts != steps[i - 1].restarts) {
        continue;
      }
      ++tells;
      const uint32_t step = steps[i].iteration - steps[i - 1].iteration;
      EXPECT_LE(step, 1u);
      updates += static_cast<int>(step);
    }
    ASSERT_GT(updates, 2);
    // Up to one partial update at each end of a search.
    EXPECT_NEAR(static_cast<double>(tells) / updates, lambda / 4.0, 1.0);
  }
}

// Each new population gets the tutorial's parameters for its lambda
// (Hansen 2016, arXiv:1604.00772, Table 1), computed here from the table's
// formulas, not from CmaParameters.
TEST(IpopTest, EachPopulationGetsTheTutorialsMuAndWeights) {
  const RunSpec spec = IpopSpec(kFlat);
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  ASSERT_TRUE(s.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
  uint32_t checked_restart = 99;
  int checked = 0;
  for (int g = 0; g < 1500 && gen.ok() && checked < 4; ++g) {
    ASSERT_TRUE((*s)->Tell(Scored(*gen, nullptr), {}).ok());
    const skerry::v1::CmaStrategyState c = (*s)->Save().cma_es();
    gen = (*s)->Ask();
    if (c.restarts() == checked_restart) continue;
    checked_restart = c.restarts();
    absl::StatusOr<CmaEs> search = CmaEs::FromProto(c.search());
    ASSERT_TRUE(search.ok());
    const CmaParameters& p = search->params();
    const int lambda = static_cast<int>(c.search().lambda());
    const double n = 2;
    SCOPED_TRACE(lambda);
    EXPECT_EQ(p.lambda, lambda);
    EXPECT_EQ(p.mu, lambda / 2);  // mu = floor(lambda / 2)
    // w'_i = ln((lambda + 1) / 2) - ln i, normalised to sum 1.
    double sum = 0, sum_sq = 0;
    std::vector<double> w;
    for (int i = 1; i <= lambda / 2; ++i) {
      w.push_back(std::log((lambda + 1) / 2.0) - std::log(i));
      sum += w.back();
    }
    ASSERT_EQ(p.weights.size(), w.size());
    for (size_t i = 0; i < w.size(); ++i) {
      EXPECT_NEAR(p.weights[i], w[i] / sum, 1e-15);
      sum_sq += (w[i] / sum) * (w[i] / sum);
    }
    const double mueff = 1 / sum_sq;
    EXPECT_NEAR(p.mueff, mueff, 1e-12);
    const double cs = (mueff + 2) / (n + mueff + 5);
    EXPECT_NEAR(p.c_sigma, cs, 1e-15);
    EXPECT_NEAR(
        p.d_sigma,
        1 + 2 * std::max(0.0, std::sqrt((mueff - 1) / (n + 1)) - 1) + cs,
        1e-15);
    EXPECT_NEAR(p.c_c, (4 + mueff / n) / (n + 4 + 2 * mueff / n), 1e-15);
    const double c1 = 2 / ((n + 1.3) * (n + 1.3) + mueff);
    EXPECT_NEAR(p.c1, c1, 1e-15);
    EXPECT_NEAR(p.c_mu,
                std::min(1 - c1, 2 * (mueff - 2 + 1 / mueff) /
                                     ((n + 2) * (n + 2) + mueff)),
                1e-15);
    ++checked;
  }
  EXPECT_EQ(checked, 4);  // lambda 4, 8, 16, 32
}

// Saved at any generation (inside an update, across restarts) and restored
// in a new instance, an IPOP island makes the same generations bit for bit.
TEST(IpopTest, RestoredMidUpdateContinuesBitForBit) {
  const RunSpec spec = IpopSpec(kFlat);
  absl::StatusOr<std::unique_ptr<Strategy>> a = MakeStrategy(spec, 0);
  ASSERT_TRUE(a.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*a)->Start();
  ASSERT_TRUE(gen.ok());
  int restored_mid_update = 0;
  for (int g = 0; g < 400; ++g) {
    const skerry::v1::StrategyState saved = (*a)->Save();
    restored_mid_update += saved.cma_es().held_values_size() > 0;
    absl::StatusOr<std::unique_ptr<Strategy>> b = MakeStrategy(spec, 0);
    ASSERT_TRUE(b.ok());
    ASSERT_TRUE((*b)->Restore(saved).ok());
    const std::vector<GenomeRecord> done = Scored(*gen, nullptr);
    ASSERT_TRUE((*a)->Tell(done, {}).ok());
    ASSERT_TRUE((*b)->Tell(done, {}).ok());
    gen = (*a)->Ask();
    absl::StatusOr<std::vector<GenomeRecord>> other = (*b)->Ask();
    ASSERT_TRUE(gen.ok() && other.ok());
    ASSERT_EQ(gen->size(), other->size());
    for (size_t i = 0; i < gen->size(); ++i) {
      ASSERT_EQ((*gen)[i].genes, (*other)[i].genes) << "generation " << g;
    }
    ASSERT_EQ((*a)->Save().SerializeAsString(),
              (*b)->Save().SerializeAsString());
  }
  EXPECT_GT(restored_mid_update, 10);
  EXPECT_GE((*a)->Save().cma_es().restarts(), 2u);
}

// A saved state whose held samples or population do not fit the spec is
// refused, not used.
TEST(IpopTest, AStateThatDoesNotFitThePopulationIsRefused) {
  const RunSpec spec = IpopSpec(kFlat);
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  ASSERT_TRUE(s.ok());
  ASSERT_TRUE((*s)->Start().ok());
  skerry::v1::StrategyState state = (*s)->Save();
  {
    skerry::v1::StrategyState bad = state;
    bad.mutable_cma_es()->set_restarts(2);  // lambda 4 is not 4 x 2^2
    EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(bad)));
  }
  {
    skerry::v1::StrategyState bad = state;
    bad.mutable_cma_es()->add_held_values(1.0);  // not a whole generation
    bad.mutable_cma_es()->add_held_genes(0.0);
    bad.mutable_cma_es()->add_held_genes(0.0);
    EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(bad)));
  }
  EXPECT_TRUE((*s)->Restore(state).ok());
}

TEST(IpopSpecTest, DefaultsAreFactorTwoAndNineIncreases) {
  const RunSpec spec = IpopSpec(
      "genome_length: 10 evaluator { builtin { function: \"sphere\" } } "
      "strategy { sep_cma_es { ipop { } } }");
  EXPECT_EQ(spec.strategy().sep_cma_es().ipop().increase_factor(), 2u);
  EXPECT_EQ(spec.strategy().sep_cma_es().ipop().max_increases(), 9u);
  // 4 + floor(3 ln 10) = 10, then 20, 40, ... 5120, and no further.
  const skerry::v1::CmaEsSpec& cma = spec.strategy().sep_cma_es();
  EXPECT_EQ(CmaPopulationAfter(cma, 0), 10u);
  EXPECT_EQ(CmaPopulationAfter(cma, 1), 20u);
  EXPECT_EQ(CmaPopulationAfter(cma, 9), 5120u);
  EXPECT_EQ(CmaPopulationAfter(cma, 30), 5120u);
}

TEST(IpopSpecTest, BadValuesNameTheField) {
  struct Case {
    const char* ipop;
    const char* field;
  };
  for (const Case& c :
       {Case{"increase_factor: 1", "strategy.cma_es.ipop.increase_factor"},
        Case{"increase_factor: 11", "strategy.cma_es.ipop.increase_factor"},
        Case{"max_increases: 31", "strategy.cma_es.ipop.max_increases"},
        // 10 x 2^14 = 163840 samples per update > 100000.
        Case{"max_increases: 14", "strategy.cma_es.ipop.max_increases"}}) {
    SCOPED_TRACE(c.ipop);
    absl::StatusOr<RunSpec> spec = ParseSpecText(
        absl::StrCat("genome_length: 10 evaluator { builtin { function: "
                     "\"sphere\" } } strategy { cma_es { ipop { ",
                     c.ipop, " } } }"),
        "bad.spec");
    ASSERT_TRUE(spec.ok()) << spec.status();
    absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
    ASSERT_TRUE(absl::IsInvalidArgument(prepared.status()));
    EXPECT_TRUE(absl::StartsWith(prepared.status().message(), c.field))
        << prepared.status();
  }
}

constexpr double kPi = 3.14159265358979323846;

// Rastrigin (Jamil & Yang 2013): 10n + sum(x_i^2 - 10 cos(2 pi x_i)).
double Rastrigin(const std::vector<double>& x) {
  double f = 10.0 * x.size();
  for (double v : x) f += v * v - 10 * std::cos(2 * kPi * v);
  return f;
}

// Evaluations until the best value is at most 1e-8, or `budget` if never.
struct Reached {
  double best = INFINITY;
  int64_t evaluations = 0;
  uint32_t restarts = 0;
};
Reached RunRastrigin(const RunSpec& spec, int64_t budget) {
  Reached r;
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  EXPECT_TRUE(s.ok());
  if (!s.ok()) return r;
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
  while (gen.ok() && r.evaluations < budget && r.best > 1e-8) {
    std::vector<GenomeRecord> done = Scored(*gen, Rastrigin);
    for (const GenomeRecord& g : done) r.best = std::min(r.best, g.score);
    r.evaluations += static_cast<int64_t>(done.size());
    EXPECT_TRUE((*s)->Tell(done, {}).ok());
    gen = (*s)->Ask();
  }
  r.restarts = (*s)->Save().cma_es().restarts();
  return r;
}

constexpr char kRastrigin[] = R"(
seed: SEED
genome_length: 10
evaluator { builtin { function: "rastrigin" } }
lower_bound: -5.12
upper_bound: 5.12
init_lower: -5.12
init_upper: 5.12
strategy { cma_es { IPOP } }
)";

RunSpec RastriginSpec(int seed, bool ipop) {
  std::string text = kRastrigin;
  text.replace(text.find("SEED"), 4, absl::StrCat(seed));
  text.replace(text.find("IPOP"), 4, ipop ? "ipop { }" : "");
  return IpopSpec(text);
}

// Rastrigin-10 to 1e-8, start uniform in [-5.12, 5.12]^10, sigma0 = 0.3 x
// 10.24, lambda_0 = 10, seeds 1 to 20. Reference budget: the CEC 2005 budget
// of 1e4 x D = 1e5 evaluations (Suganthan et al. 2005, the CEC 2005 problem
// definitions; from memory), in which Auger & Hansen 2005 report IPOP-CMA-ES
// solving the shifted Rastrigin (f9) in 10 dimensions in most of its runs
// (from memory, not read; their start and step differ). Measured here: every
// seed solved within 4e5 evaluations (four times that budget), with a median
// of about 1.24e5, after 2 to 6 restarts (lambda 40 to 640): 7 of 20 seeds
// within the 1e5. The test holds all 20 within 4e5 and the median under 1.5e5.
// Restarts with a constant lambda of 10 solve none of the first three seeds in
// the same 4e5 (about 110 restarts each, best 2 to 3): the growing population
// is what finds the global basin.
TEST(IpopTest, SolvesRastriginTenOnEverySeedWithinFourCecBudgets) {
  constexpr int64_t kBudget = 400000;
  std::vector<int64_t> used;
  for (int seed = 1; seed <= 20; ++seed) {
    SCOPED_TRACE(seed);
    const Reached ipop = RunRastrigin(RastriginSpec(seed, true), kBudget);
    EXPECT_LE(ipop.best, 1e-8)
        << ipop.evaluations << " evaluations, " << ipop.restarts << " restarts";
    EXPECT_GE(ipop.restarts, 1u);
    used.push_back(ipop.evaluations);
  }
  std::sort(used.begin(), used.end());
  EXPECT_LT((used[9] + used[10]) / 2, 150000);
  for (int seed = 1; seed <= 3; ++seed) {
    SCOPED_TRACE(seed);
    const Reached plain = RunRastrigin(RastriginSpec(seed, false), kBudget);
    EXPECT_GT(plain.best, 1e-8) << plain.evaluations << " evaluations";
    EXPECT_GT(plain.restarts, 50u);
  }
}

}  // namespace
}  // namespace skerry::engine
