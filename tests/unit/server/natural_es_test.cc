// Tests for the natural-gradient ES (server/engine/natural_es.h and its
// islands, natural_es_strategy.cc) against the published definitions:
// centred ranks (Salimans et al. 2017, arXiv:1703.03864, section 2.3),
// mirrored sampling (same, section 2.3), Adam (Kingma & Ba 2014,
// arXiv:1412.6980, Algorithm 1), and the sphere (Jamil & Yang 2013).
#include "server/engine/natural_es.h"

#include <cmath>
#include <limits>
#include <memory>
#include <optional>
#include <string>
#include <utility>
#include <vector>

#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"
#include "server/engine/breeder.h"
#include "server/engine/gene_spread.h"
#include "server/engine/strategy.h"
#include "tests/unit/server/strategy_test_util.h"

namespace skerry::engine {
namespace {

using skerry::v1::RunSpec;
using store::GenomeRecord;

// Worked example of the definition y_r = r / (n - 1) - 0.5, rank r = 0 for
// the lowest (Salimans et al. 2017, section 2.3; their code's
// compute_centered_ranks, from memory): utilities 3, 1, 2, 5 have ranks
// 2, 0, 1, 3 of n - 1 = 3 [D].
TEST(CentredRanksTest, WorkedExample) {
  const std::vector<double> y = CentredRanks({3.0, 1.0, 2.0, 5.0});
  ASSERT_EQ(y.size(), 4u);
  EXPECT_DOUBLE_EQ(y[0], 2.0 / 3.0 - 0.5);
  EXPECT_DOUBLE_EQ(y[1], -0.5);
  EXPECT_DOUBLE_EQ(y[2], 1.0 / 3.0 - 0.5);
  EXPECT_DOUBLE_EQ(y[3], 0.5);
  // Only the order counts: any increasing transformation gives the same.
  EXPECT_EQ(CentredRanks(
                {std::exp(3.0), std::exp(1.0), std::exp(2.0), std::exp(5.0)}),
            y);
}

// Equal values share their mean rank (ours: see natural_es.h); failed
// evaluations (-infinity) rank lowest and share too.
TEST(CentredRanksTest, TiesShareTheirMeanRank) {
  const double inf = std::numeric_limits<double>::infinity();
  const std::vector<double> y = CentredRanks({7.0, -inf, 7.0, -inf, 9.0});
  // Ranks: -inf at 0 and 1 (mean 0.5), 7 at 2 and 3 (mean 2.5), 9 at 4.
  EXPECT_DOUBLE_EQ(y[1], 0.5 / 4 - 0.5);
  EXPECT_DOUBLE_EQ(y[3], 0.5 / 4 - 0.5);
  EXPECT_DOUBLE_EQ(y[0], 2.5 / 4 - 0.5);
  EXPECT_DOUBLE_EQ(y[2], 2.5 / 4 - 0.5);
  EXPECT_DOUBLE_EQ(y[4], 0.5);
  double sum = 0;
  for (double v : y) sum += v;
  EXPECT_NEAR(sum, 0.0, 1e-15);
  EXPECT_EQ(CentredRanks({4.0}), std::vector<double>{0.0});
}

RunSpec EsSpec(const std::string& extra = "") {
  absl::StatusOr<RunSpec> spec = ParseSpecText(
      "seed: 17 genome_length: 10 evaluator { builtin { function: "
      "\"sphere\" } } strategy { natural_es { " +
          extra + " } }",
      "es.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
  EXPECT_TRUE(prepared.ok()) << prepared.status();
  return prepared.ok() ? *prepared : *spec;
}

// Mirrored sampling: on a constant function both samples of every pair
// score alike, so the estimate is exactly zero whatever the perturbations,
// raw or rank-shaped (Salimans et al. 2017, section 2.3: antithetic pairs
// cancel the constant term of F).
TEST(MirroredGradientTest, ConstantFunctionGivesExactlyZero) {
  const RunSpec spec = EsSpec();
  std::vector<std::vector<double>> eps;
  for (uint32_t i = 0; i < 10; ++i) eps.push_back(Perturbation(spec, 0, 3, i));
  const std::vector<double> raw(20, 42.0);
  for (const std::vector<double>& f : {raw, CentredRanks(raw)}) {
    const std::vector<double> g = MirroredGradient(f, eps, 0.5);
    ASSERT_EQ(g.size(), 10u);
    for (double x : g) EXPECT_EQ(x, 0.0);
  }
}

// On a linear F(x) = c.x, F+ - F- = 2 sigma c.eps, so the estimate is
// 1/P sum (c.eps_i) eps_i, whose expectation is c [D]. With 2000 pairs its
// error per gene has standard deviation about |c| / sqrt(2000) = 0.05.
TEST(MirroredGradientTest, LinearFunctionEstimatesItsGradient) {
  RunSpec spec = EsSpec();
  spec.set_genome_length(3);
  const std::vector<double> c = {1.0, -2.0, 0.5};
  const double sigma = 0.1;
  std::vector<std::vector<double>> eps;
  std::vector<double> f;
  for (uint32_t i = 0; i < 2000; ++i) {
    eps.push_back(Perturbation(spec, 1, 0, i));
    double dot = 0;
    for (int j = 0; j < 3; ++j) dot += c[j] * sigma * eps.back()[j];
    f.push_back(dot);
    f.push_back(-dot);
  }
  const std::vector<double> g = MirroredGradient(f, eps, sigma);
  for (int j = 0; j < 3; ++j) EXPECT_NEAR(g[j], c[j], 0.25) << j;
}

// Two steps worked by hand from Kingma & Ba 2014, Algorithm 1, alpha 0.1,
// beta1 0.9, beta2 0.999, epsilon 1e-8, theta_0 = (1, -2):
//   t = 1, d = (0.5, -0.1): m = 0.1 d, v = 0.001 d^2, m^ = d, v^ = d^2,
//     theta_1 = theta_0 - 0.1 d / (|d| + 1e-8) = (0.900000002, -1.90000001).
//   t = 2, d = (0.5, 0.3): m = (0.095, 0.021), v = (0.00049975, 0.00009999),
//     gene 1: m^ = 0.095 / 0.19 = 0.5, v^ = 0.00049975 / 0.001999 = 0.25,
//     theta = 0.900000002 - 0.1 x 0.5 / (0.5 + 1e-8) = 0.800000004;
//     gene 2: m^ = 0.021 / 0.19, v^ = 0.00009999 / 0.001999,
//     theta = -1.90000001 - 0.1 m^ / (sqrt(v^) + 1e-8) = -1.94941899112 [D].
TEST(AdamTest, TwoStepsEqualTheHandComputedAlgorithm1) {
  AdamParameters p;
  p.learning_rate = 0.1;
  ASSERT_EQ(p.beta1, 0.9);  // the paper's defaults
  ASSERT_EQ(p.beta2, 0.999);
  ASSERT_EQ(p.epsilon, 1e-8);
  skerry::v1::NaturalEsState s;
  s.add_centre(1.0);
  s.add_centre(-2.0);
  for (int i = 0; i < 2; ++i) {
    s.add_adam_m(0.0);
    s.add_adam_v(0.0);
  }
  AdamStep(p, {0.5, -0.1}, &s);
  EXPECT_EQ(s.step(), 1u);
  EXPECT_NEAR(s.centre(0), 0.900000002, 1e-12);
  EXPECT_NEAR(s.centre(1), -1.90000001, 1e-12);
  EXPECT_NEAR(s.adam_m(0), 0.05, 1e-15);
  EXPECT_NEAR(s.adam_v(1), 0.00001, 1e-18);
  AdamStep(p, {0.5, 0.3}, &s);
  EXPECT_EQ(s.step(), 2u);
  EXPECT_NEAR(s.adam_m(0), 0.095, 1e-15);
  EXPECT_NEAR(s.adam_m(1), 0.021, 1e-15);
  EXPECT_NEAR(s.adam_v(0), 0.00049975, 1e-15);
  EXPECT_NEAR(s.adam_v(1), 0.00009999, 1e-15);
  EXPECT_NEAR(s.centre(0), 0.800000004, 1e-12);
  const double m_hat = 0.021 / 0.19;
  const double v_hat = 0.00009999 / 0.001999;
  EXPECT_NEAR(s.centre(1),
              -1.90000001 - 0.1 * m_hat / (std::sqrt(v_hat) + 1e-8), 1e-12);
  EXPECT_NEAR(s.centre(1), -1.94941899112, 1e-10);
}

// Weight decay adds weight_decay x theta to the descended direction: with a
// constant function (zero gradient) the first Adam step moves each gene
// toward 0 by learning_rate (m^ / sqrt(v^) = sign at t = 1).
TEST(NaturalEsUpdateTest, WeightDecayPullsTheCentreTowardZero) {
  RunSpec spec = EsSpec("weight_decay: 0.005 learning_rate: 0.1");
  spec.set_genome_length(2);
  skerry::v1::NaturalEsState s;
  s.add_centre(3.0);
  s.add_centre(-1.0);
  for (int i = 0; i < 2; ++i) {
    s.add_adam_m(0.0);
    s.add_adam_v(0.0);
  }
  std::vector<std::vector<double>> eps = {Perturbation(spec, 0, 0, 0)};
  NaturalEsUpdate(spec.strategy().natural_es(), 0, {1.0, 1.0}, eps, &s);
  EXPECT_NEAR(s.centre(0), 2.9, 1e-6);
  EXPECT_NEAR(s.centre(1), -0.9, 1e-6);
}

// Ids from first_id by slot; score = sphere.
std::vector<GenomeRecord> Evaluated(std::vector<GenomeRecord> gen,
                                    int64_t first_id) {
  gen = testing::Built(std::move(gen));
  for (GenomeRecord& g : gen) {
    g.id = first_id + g.slot;
    g.state = skerry::v1::EVALUATED;
    double s = 0.0;
    for (double x : g.genes) s += x * x;
    g.score = s;
    g.attempts = 1;
  }
  return gen;
}

double Sphere(const skerry::v1::StrategyState& s) {
  double f = 0;
  for (double x : s.natural_es().centre()) f += x * x;
  return f;
}

// The sphere in 10 dimensions, started uniformly in [-5.12, 5.12]^10 (f
// about 87 on average): within 400 generations of the default 20 samples
// (8,000 evaluations) the centre is within 1e-2 of the optimum's value 0
// (Jamil & Yang 2013). Stated tolerance and budget, ours.
TEST(NaturalEsStrategyTest, SolvesTheSphereInTenDimensions) {
  const RunSpec spec = EsSpec();
  ASSERT_EQ(spec.strategy().natural_es().population_size(), 20u);
  absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 0);
  ASSERT_TRUE(made.ok()) << made.status();
  Strategy& es = **made;
  absl::StatusOr<std::vector<GenomeRecord>> gen = es.Start();
  ASSERT_TRUE(gen.ok());
  const double start = Sphere(es.Save());
  EXPECT_GT(start, 10.0);
  int generations = 0;
  for (; generations < 400 && Sphere(es.Save()) >= 1e-2; ++generations) {
    ASSERT_TRUE(es.Tell(Evaluated(*gen, 1), {}).ok());
    gen = es.Ask();
    ASSERT_TRUE(gen.ok());
  }
  RecordProperty("generations", generations);
  EXPECT_LT(Sphere(es.Save()), 1e-2)
      << "after " << generations << " generations from f = " << start;
}

// Pair i of a generation is centre +/- sigma eps_i at slots 2i + 1 and
// 2i + 2, after the centre itself at slot 0 (the distribution genome), eps_i
// rebuilt from its key (seed, island, generation, pair) alone.
TEST(NaturalEsStrategyTest, SamplesAreMirroredPairsRebuiltFromTheirKey) {
  const RunSpec spec = EsSpec();
  absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 2);
  ASSERT_TRUE(made.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*made)->Start();
  ASSERT_TRUE(gen.ok());
  ASSERT_TRUE((*made)->Tell(Evaluated(*gen, 1), {}).ok());
  gen = (*made)->Ask();
  ASSERT_TRUE(gen.ok());
  ASSERT_EQ(gen->size(), 21u);
  // The samples are their recipes alone (records.h); a worker builds them.
  for (size_t i = 1; i < gen->size(); ++i) {
    EXPECT_TRUE((*gen)[i].genes.empty()) << "slot " << i;
    EXPECT_TRUE((*gen)[i].recipe.has_value()) << "slot " << i;
  }
  gen = testing::Built(*std::move(gen));
  const skerry::v1::StrategyState state = (*made)->Save();
  EXPECT_EQ(state.generation(), 1u);
  EXPECT_EQ((*gen)[0].origin, skerry::v1::DISTRIBUTION);
  EXPECT_EQ((*gen)[0].genes,
            std::vector<double>(state.natural_es().centre().begin(),
                                state.natural_es().centre().end()));
  const double sigma = spec.strategy().natural_es().sigma();
  for (uint32_t i = 0; i < 10; ++i) {
    const std::vector<double> eps = Perturbation(spec, 2, 1, i);
    const GenomeRecord& plus = (*gen)[2 * i + 1];
    const GenomeRecord& minus = (*gen)[2 * i + 2];
    EXPECT_EQ(plus.origin, skerry::v1::SAMPLED);
    EXPECT_EQ(plus.generation, 1u);
    EXPECT_EQ(minus.slot, 2 * i + 2);
    for (int j = 0; j < 10; ++j) {
      const double c = state.natural_es().centre(j);
      EXPECT_EQ(plus.genes[j], c + sigma * eps[j]);
      EXPECT_EQ(minus.genes[j], c - sigma * eps[j]);
    }
  }
  // Another island, generation or pair draws another perturbation.
  EXPECT_NE(Perturbation(spec, 2, 1, 0), Perturbation(spec, 1, 1, 0));
  EXPECT_NE(Perturbation(spec, 2, 1, 0), Perturbation(spec, 2, 2, 0));
  EXPECT_NE(Perturbation(spec, 2, 1, 0), Perturbation(spec, 2, 1, 1));
}

// The sigma schedule: generation g samples with max(sigma_min, sigma x
// sigma_decay^g) (an exponentially decayed noise level with a floor, common
// practice), hand-computed for sigma 0.5 and decay 0.5: 0.5, 0.25, 0.125,
// then the floor 0.1. Unset, sigma is fixed.
TEST(NaturalEsSigmaTest, ScheduleDecaysToItsFloorAndUnsetIsFixed) {
  const RunSpec fixed = EsSpec("sigma: 0.5");
  EXPECT_EQ(NaturalEsSigma(fixed.strategy().natural_es(), 0), 0.5);
  EXPECT_EQ(NaturalEsSigma(fixed.strategy().natural_es(), 40), 0.5);
  const RunSpec decayed = EsSpec("sigma: 0.5 sigma_decay: 0.5 sigma_min: 0.1");
  const skerry::v1::NaturalEsSpec& es = decayed.strategy().natural_es();
  EXPECT_EQ(NaturalEsSigma(es, 0), 0.5);
  EXPECT_EQ(NaturalEsSigma(es, 1), 0.25);
  EXPECT_EQ(NaturalEsSigma(es, 2), 0.125);
  EXPECT_EQ(NaturalEsSigma(es, 3), 0.1);
  EXPECT_EQ(NaturalEsSigma(es, 30), 0.1);
}

// With a schedule, generation 2's mirrored pairs lie at centre +/- sigma_2
// eps, sigma_2 = 0.3 x 0.8^2 = 0.192 (well inside the sphere's bounds, so no
// clamping).
TEST(NaturalEsSigmaTest, ScheduledSamplesUseTheirGenerationsSigma) {
  const RunSpec spec = EsSpec("sigma: 0.3 sigma_decay: 0.8");
  absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 0);
  ASSERT_TRUE(made.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*made)->Start();
  ASSERT_TRUE(gen.ok());
  for (int g = 1; g <= 2; ++g) {
    ASSERT_TRUE((*made)->Tell(Evaluated(*gen, 100 * g), {}).ok());
    gen = (*made)->Ask();
    ASSERT_TRUE(gen.ok());
  }
  gen = testing::Built(*std::move(gen));
  const skerry::v1::StrategyState state = (*made)->Save();
  ASSERT_EQ(state.generation(), 2u);
  const double sigma = NaturalEsSigma(spec.strategy().natural_es(), 2);
  EXPECT_NEAR(sigma, 0.192, 1e-15);
  for (uint32_t i = 0; i < 3; ++i) {
    const std::vector<double> eps = Perturbation(spec, 0, 2, i);
    for (int j = 0; j < 10; ++j) {
      const double c = state.natural_es().centre(j);
      EXPECT_EQ((*gen)[2 * i + 1].genes[j], c + sigma * eps[j]);
      EXPECT_EQ((*gen)[2 * i + 2].genes[j], c - sigma * eps[j]);
    }
  }
}

// A schedule out of range is refused naming the field.
TEST(NaturalEsSigmaTest, BadScheduleIsRefusedNamingTheField) {
  for (const auto& [extra, field] :
       {std::pair<std::string, std::string>{"sigma_decay: 0",
                                            "natural_es.sigma_decay"},
        {"sigma_decay: 1.5", "natural_es.sigma_decay"},
        {"sigma: 0.1 sigma_min: 0.2", "natural_es.sigma_min"}}) {
    absl::StatusOr<RunSpec> spec = ParseSpecText(
        "genome_length: 4 evaluator { builtin { function: \"sphere\" } } "
        "strategy { natural_es { " +
            extra + " } }",
        "bad.spec");
    ASSERT_TRUE(spec.ok());
    absl::StatusOr<RunSpec> prepared = PrepareSpec(*spec);
    ASSERT_FALSE(prepared.ok()) << extra;
    EXPECT_NE(prepared.status().message().find(field), std::string::npos)
        << prepared.status();
  }
}

// Saved after any generation and restored in a new instance (a restarted
// coordinator), an island makes the same generations bit for bit.
TEST(NaturalEsStrategyTest, RestoredIslandContinuesBitForBit) {
  const RunSpec spec = EsSpec("weight_decay: 0.01");
  absl::StatusOr<std::unique_ptr<Strategy>> a = MakeStrategy(spec, 0);
  ASSERT_TRUE(a.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*a)->Start();
  ASSERT_TRUE(gen.ok());
  std::unique_ptr<Strategy> b;
  for (int g = 0; g < 12; ++g) {
    std::vector<GenomeRecord> done = Evaluated(*gen, 100 * (g + 1));
    if (g == 5) {
      absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 0);
      ASSERT_TRUE(made.ok());
      b = std::move(*made);
      ASSERT_TRUE(b->Restore((*a)->Save()).ok());
    }
    ASSERT_TRUE((*a)->Tell(done, {}).ok());
    gen = (*a)->Ask();
    ASSERT_TRUE(gen.ok());
    if (b != nullptr) {
      ASSERT_TRUE(b->Tell(done, {}).ok());
      absl::StatusOr<std::vector<GenomeRecord>> other = b->Ask();
      ASSERT_TRUE(other.ok());
      ASSERT_EQ(other->size(), gen->size());
      const std::vector<GenomeRecord> built = testing::Built(*gen);
      const std::vector<GenomeRecord> other_built = testing::Built(*other);
      for (size_t i = 0; i < gen->size(); ++i) {
        EXPECT_EQ(other_built[i].genes, built[i].genes);
        EXPECT_EQ((*other)[i].recipe, (*gen)[i].recipe);
      }
    }
  }
  EXPECT_EQ(b->Save().SerializeAsString(), (*a)->Save().SerializeAsString());
  EXPECT_EQ((*a)->Save().natural_es().step(), 12u);
}

// Migration: a migrant better than every sample of the completed generation
// becomes the centre; a worse one changes nothing.
TEST(NaturalEsStrategyTest, ABetterMigrantBecomesTheCentre) {
  const RunSpec spec = EsSpec();
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(spec, 0);
  absl::StatusOr<std::unique_ptr<Strategy>> twin = MakeStrategy(spec, 0);
  ASSERT_TRUE(s.ok() && twin.ok());
  absl::StatusOr<std::vector<GenomeRecord>> gen = (*s)->Start();
  ASSERT_TRUE(gen.ok() && (*twin)->Start().ok());
  GenomeRecord worse;
  worse.genes.assign(10, 5.0);
  worse.state = skerry::v1::EVALUATED;
  worse.score = 1e9;
  const GenomeRecord* worse_only[] = {&worse};
  ASSERT_TRUE((*twin)->Tell(Evaluated(*gen, 1), worse_only).ok());
  GenomeRecord better;
  better.genes.assign(10, 0.25);
  better.state = skerry::v1::EVALUATED;
  better.score = -1.0;  // better than any sphere value
  const GenomeRecord* migrants[] = {&worse, &better};
  ASSERT_TRUE((*s)->Tell(Evaluated(*gen, 1), migrants).ok());
  const skerry::v1::StrategyState moved = (*s)->Save();
  for (double c : moved.natural_es().centre()) EXPECT_EQ(c, 0.25);
  // The worse migrant alone: the centre is the Adam step's, as with none.
  absl::StatusOr<std::unique_ptr<Strategy>> none = MakeStrategy(spec, 0);
  ASSERT_TRUE(none.ok() && (*none)->Start().ok());
  ASSERT_TRUE((*none)->Tell(Evaluated(*gen, 1), {}).ok());
  EXPECT_EQ((*twin)->Save().SerializeAsString(),
            (*none)->Save().SerializeAsString());
}

// The update with each pair's eps drawn when needed (what the strategy uses,
// so the coordinator holds one eps at a time) is bit for bit the update from
// every eps held at once.
TEST(NaturalEsUpdateTest, StreamingEqualsTheUpdateFromEveryEpsHeld) {
  const RunSpec spec = EsSpec("weight_decay: 0.01");
  const skerry::v1::NaturalEsSpec& es = spec.strategy().natural_es();
  skerry::v1::NaturalEsState held;
  for (int j = 0; j < 10; ++j) {
    held.add_centre(0.1 * j - 0.3);
    held.add_adam_m(0.0);
    held.add_adam_v(0.0);
  }
  skerry::v1::NaturalEsState streamed = held;
  const std::vector<double> utilities = {3.0, -1.0, 0.5, 0.5, 2.0, -7.0};
  std::vector<std::vector<double>> eps;
  for (uint32_t i = 0; i < 3; ++i) eps.push_back(Perturbation(spec, 1, 4, i));
  std::vector<uint32_t> asked;
  for (int step = 0; step < 3; ++step) {
    NaturalEsUpdate(es, 4, utilities, eps, &held);
    NaturalEsUpdateStreaming(
        es, 4, utilities,
        [&](uint32_t pair) {
          asked.push_back(pair);
          return Perturbation(spec, 1, 4, pair);
        },
        &streamed);
    EXPECT_EQ(streamed.SerializeAsString(), held.SerializeAsString())
        << "step " << step;
  }
  EXPECT_EQ(asked, (std::vector<uint32_t>{0, 1, 2, 0, 1, 2, 0, 1, 2}));
}

// The population standard deviation of 2, 4, 4, 4, 5, 5, 7, 9 is 2 (the
// worked example of Wikipedia's "Standard deviation" article, from memory):
// GeneSpread's one pass gives it, for each gene, and their mean.
TEST(GeneSpreadTest, WorkedExampleOfThePopulationStandardDeviation) {
  GeneSpread spread(2);
  for (double x : {2.0, 4.0, 4.0, 4.0, 5.0, 5.0, 7.0, 9.0}) {
    spread.Add(std::vector<double>{x, 10.0 * x});  // sd 2 and 20
  }
  EXPECT_DOUBLE_EQ(spread.Diversity(), 11.0);
  EXPECT_EQ(GeneSpread(3).Diversity(), 0.0);
}

// A generation of samples held as recipes is measured without its genes: the
// diversity Tell reports (drawing each pair once for the update and this) is
// RecipeDiversity's bit for bit, and agrees with the two-pass ComputeStats
// over the built genes. A damaged recipe is refused naming its slot.
TEST(NaturalEsStrategyTest, ToldDiversityIsTheGenerationsDiversity) {
  for (const char* precision : {"", "gene_precision: FLOAT32"}) {
    SCOPED_TRACE(precision);
    RunSpec spec = EsSpec();
    if (*precision != 0) spec.set_gene_precision(skerry::v1::FLOAT32);
    absl::StatusOr<std::unique_ptr<Strategy>> made = MakeStrategy(spec, 1);
    ASSERT_TRUE(made.ok());
    absl::StatusOr<std::vector<GenomeRecord>> gen = (*made)->Start();
    ASSERT_TRUE(gen.ok());
    EXPECT_FALSE((*made)->ToldDiversity().has_value());
    std::vector<GenomeRecord> told = Evaluated(*gen, 1);
    for (GenomeRecord& g : told) {
      if (g.recipe.has_value()) g.genes.clear();  // as the engine holds them
    }
    ASSERT_TRUE((*made)->Tell(told, {}).ok());
    const std::optional<double> d = (*made)->ToldDiversity();
    ASSERT_TRUE(d.has_value());
    absl::StatusOr<double> alone = RecipeDiversity(told);
    ASSERT_TRUE(alone.ok()) << alone.status();
    EXPECT_EQ(*d, *alone);
    const double two_pass = ComputeStats(spec, testing::Built(*gen)).diversity;
    EXPECT_GT(two_pass, 0.0);
    EXPECT_NEAR(*d, two_pass, 1e-12 * two_pass);

    std::vector<GenomeRecord> damaged = told;
    damaged[3].recipe->pair = 7;
    absl::StatusOr<double> refused = RecipeDiversity(damaged);
    EXPECT_TRUE(absl::IsInvalidArgument(refused.status()));
    EXPECT_THAT(std::string(refused.status().message()),
                ::testing::HasSubstr("slot 3"));
    EXPECT_TRUE(absl::IsInvalidArgument((*made)->Tell(damaged, {})));
  }
}

TEST(NaturalEsStrategyTest, ForeignOrDamagedStatesAreRefused) {
  absl::StatusOr<std::unique_ptr<Strategy>> s = MakeStrategy(EsSpec(), 0);
  ASSERT_TRUE(s.ok());
  ASSERT_TRUE((*s)->Start().ok());
  skerry::v1::StrategyState ga;
  ga.mutable_ga();
  EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(ga)));
  skerry::v1::StrategyState short_state = (*s)->Save();
  short_state.mutable_natural_es()->mutable_adam_v()->RemoveLast();
  EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(short_state)));
  skerry::v1::StrategyState nan_state = (*s)->Save();
  nan_state.mutable_natural_es()->set_adam_v(3, -1.0);
  EXPECT_TRUE(absl::IsInvalidArgument((*s)->Restore(nan_state)));
  EXPECT_TRUE(absl::IsInvalidArgument((*s)->Tell({}, {})));
}

}  // namespace
}  // namespace skerry::engine
