// The pole evaluators as a run spec sees them: defaults, validation, episodes,
// aggregation and the generalisation cases.
#include <memory>
#include <set>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/evaluator.h"
#include "common/network.h"
#include "common/pole.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::pole {
namespace {

using skerry::v1::RunSpec;
using ::testing::HasSubstr;

RunSpec Parse(const std::string& text) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(text, "test.spec");
  EXPECT_TRUE(spec.ok()) << spec.status();
  return spec.ok() ? *spec : RunSpec();
}

TEST(PoleSpecTest, DefaultsFillNetworkGenomeLengthBoundsAndObjective) {
  absl::StatusOr<RunSpec> spec =
      PrepareSpec(Parse("evaluator { double_pole {} }"));
  ASSERT_TRUE(spec.ok()) << spec.status();
  const auto& ev = spec->evaluator();
  EXPECT_EQ(ev.double_pole().max_steps(), 100000u);
  EXPECT_EQ(ev.double_pole().fitness(), skerry::v1::BALANCE_STEPS);
  EXPECT_EQ(ev.network().inputs(), 6u);
  ASSERT_EQ(ev.network().layers_size(), 1);
  EXPECT_EQ(ev.network().layers(0).activation(), skerry::v1::ACTIVATION_TANH);
  EXPECT_EQ(spec->genome_length(), 7u);  // 6 weights + bias
  EXPECT_EQ(spec->objective(), skerry::v1::MAXIMIZE);
  EXPECT_EQ(spec->lower_bound(), -10.0);
  EXPECT_EQ(spec->upper_bound(), 10.0);
  EXPECT_EQ(ev.episodes().count(), 1u);
  EXPECT_EQ(ev.episodes().aggregate(), skerry::v1::AGGREGATE_MEAN);
}

TEST(PoleSpecTest, WithoutVelocitiesDefaultsToRecurrentNetAndDamping) {
  absl::StatusOr<RunSpec> spec =
      PrepareSpec(Parse("evaluator { double_pole { hide_velocities: true } }"));
  ASSERT_TRUE(spec.ok()) << spec.status();
  const auto& ev = spec->evaluator();
  EXPECT_EQ(ev.double_pole().fitness(), skerry::v1::GRUAU_DAMPING);
  EXPECT_TRUE(ev.network().recurrent());
  EXPECT_EQ(ev.network().inputs(), 3u);
  // 5 * (3 + 5 + 1) + 1 * (5 + 1) = 51.
  EXPECT_EQ(spec->genome_length(), 51u);
}

TEST(PoleSpecTest, MismatchedGenomeLengthNamesBothNumbers) {
  absl::StatusOr<RunSpec> spec = PrepareSpec(Parse(
      "genome_length: 10 evaluator { cart_pole {} network { layers { size: 3 }"
      " layers { size: 1 } } }"));
  ASSERT_FALSE(spec.ok());
  // 4 inputs: 3 * (4 + 1) + 1 * (3 + 1) = 19 weights.
  EXPECT_THAT(spec.status().message(), HasSubstr("genome_length"));
  EXPECT_THAT(spec.status().message(), HasSubstr("allowed: 19"));
  EXPECT_THAT(spec.status().message(), HasSubstr("got 10"));
}

TEST(PoleSpecTest, BadFieldsAreNamed) {
  struct Case {
    const char* text;
    const char* field;
  };
  const Case cases[] = {
      {"evaluator { double_pole {} network { inputs: 4 } }",
       "evaluator.network.inputs:"},
      {"evaluator { double_pole {} network { layers { size: 2 } } }",
       "evaluator.network.layers[0].size:"},
      {"evaluator { cart_pole {} network { recurrent: false layers { size: 1 }"
       " } episodes { count: 5000 } }",
       "evaluator.episodes.count:"},
      {"evaluator { cart_pole {} episodes { start_noise: 1.5 } }",
       "evaluator.episodes.start_noise:"},
      {"evaluator { cart_pole { max_steps: 20000000 } }",
       "evaluator.cart_pole.max_steps:"},
      {"objective: MINIMIZE evaluator { cart_pole {} }", "objective:"},
      {"evaluator { double_pole {} network { recurrent: true layers { size: 1"
       " } } }",
       "evaluator.network.recurrent:"},
      {"evaluator { builtin { function: \"sphere\" } network {} }"
       " genome_length: 2",
       "evaluator.network:"},
  };
  for (const Case& c : cases) {
    SCOPED_TRACE(c.text);
    absl::StatusOr<RunSpec> spec = PrepareSpec(Parse(c.text));
    ASSERT_FALSE(spec.ok());
    EXPECT_EQ(spec.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(spec.status().message(), HasSubstr(c.field));
  }
}

std::unique_ptr<Evaluator> Make(const std::string& text, RunSpec* out) {
  absl::StatusOr<RunSpec> spec = PrepareSpec(Parse(text));
  EXPECT_TRUE(spec.ok()) << spec.status();
  if (!spec.ok()) return nullptr;
  *out = *spec;
  absl::StatusOr<std::unique_ptr<Evaluator>> ev =
      MakeEvaluator(spec->evaluator());
  EXPECT_TRUE(ev.ok()) << ev.status();
  return ev.ok() ? *std::move(ev) : nullptr;
}

TEST(PoleEvaluatorTest, ScoreIsStepsBalancedByTheNetwork) {
  RunSpec spec;
  std::unique_ptr<Evaluator> ev = Make("evaluator { double_pole {} }", &spec);
  ASSERT_NE(ev, nullptr);
  std::vector<double> zeros(spec.genome_length(), 0.0);  // u = tanh(0) = 0
  absl::StatusOr<double> score = ev->Evaluate(zeros, 7);
  ASSERT_TRUE(score.ok()) << score.status();
  struct Idle : Controller {
    void Reset() override {}
    absl::StatusOr<double> Act(absl::Span<const double>) override { return 0; }
  } idle;
  absl::StatusOr<uint64_t> direct =
      BalanceDoublePole(DoublePoleTask{}, DoublePoleStart(false), 100000, idle);
  ASSERT_TRUE(direct.ok());
  EXPECT_EQ(*score, static_cast<double>(*direct));
}

TEST(PoleEvaluatorTest, WrongGeneCountFailsTheAttempt) {
  RunSpec spec;
  std::unique_ptr<Evaluator> ev = Make("evaluator { cart_pole {} }", &spec);
  ASSERT_NE(ev, nullptr);
  std::vector<double> genes(3, 0.0);
  absl::StatusOr<double> score = ev->Evaluate(genes, 0);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(score.status().message(), HasSubstr("needs 5 weights"));
}

// A linear controller that balances the single pole for a while: push toward
// the lean (weights on theta and theta').
std::vector<double> LeanController() { return {0.0, 0.0, 5.0, 2.0, 0.0}; }

TEST(PoleEvaluatorTest, EpisodesAreReproducibleFromTheEvaluationSeed) {
  RunSpec spec;
  std::unique_ptr<Evaluator> ev = Make(
      "evaluator { cart_pole { max_steps: 2000 } episodes { count: 5"
      " start_noise: 1 aggregate: AGGREGATE_MIN } }",
      &spec);
  ASSERT_NE(ev, nullptr);
  const std::vector<double> genes = LeanController();
  absl::StatusOr<double> a = ev->Evaluate(genes, 42);
  absl::StatusOr<double> b = ev->Evaluate(genes, 42);
  ASSERT_TRUE(a.ok() && b.ok());
  EXPECT_EQ(*a, *b);
  // Another seed draws other starts; across a few seeds some score differs.
  std::set<double> seen;
  for (uint64_t seed = 0; seed < 8; ++seed)
    seen.insert(*ev->Evaluate(genes, seed));
  EXPECT_GT(seen.size(), 1u);
}

TEST(PoleEvaluatorTest, AggregatesOrderAsMinMedianMean) {
  auto score = [](const char* aggregate, uint64_t seed) {
    RunSpec spec;
    std::unique_ptr<Evaluator> ev =
        Make(absl::StrCat("evaluator { cart_pole { max_steps: 2000 } episodes {"
                          " count: 6 start_noise: 1 aggregate: ",
                          aggregate, " } }"),
             &spec);
    return *ev->Evaluate(LeanController(), seed);
  };
  for (uint64_t seed : {1u, 2u, 3u}) {
    SCOPED_TRACE(seed);
    const double lo = score("AGGREGATE_MIN", seed);
    EXPECT_LE(lo, score("AGGREGATE_MEDIAN", seed));
    EXPECT_LE(lo, score("AGGREGATE_MEAN", seed));
  }
}

TEST(PoleEvaluatorTest, DampingScoreOfAnIdleNetworkIsTheTimeTerm) {
  RunSpec spec;
  std::unique_ptr<Evaluator> ev = Make(
      "evaluator { double_pole { hide_velocities: true } network {"
      " layers { size: 1 } } }",
      &spec);
  ASSERT_NE(ev, nullptr);
  absl::StatusOr<double> score =
      ev->Evaluate(std::vector<double>(spec.genome_length(), 0.0), 0);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_GT(*score, 0.0);
  EXPECT_LT(*score, 0.1 * 100 / 1000.0);  // fell before 100 steps: f2 = 0
}

TEST(PoleEvaluatorTest, GeneralisationCasesRunFromTheGridStarts) {
  absl::StatusOr<RunSpec> spec =
      PrepareSpec(Parse("evaluator { double_pole {} }"));
  ASSERT_TRUE(spec.ok());
  std::vector<double> zeros(spec->genome_length(), 0.0);
  absl::StatusOr<uint64_t> steps =
      RunGeneralisationCase(spec->evaluator(), zeros, 0);
  ASSERT_TRUE(steps.ok()) << steps.status();
  EXPECT_LT(*steps, kGeneralisationSteps);
  EXPECT_FALSE(RunGeneralisationCase(spec->evaluator(), zeros, 625).ok());
  absl::StatusOr<uint32_t> passed =
      GeneralisationTest(spec->evaluator(), zeros);
  ASSERT_TRUE(passed.ok());
  // Doing nothing balances only from the 5 starts that are exact equilibria:
  // x' = theta_1 = theta_1' = 0 (fraction 0.5), both poles upright at rest.
  EXPECT_EQ(*passed, 5u);
}

}  // namespace
}  // namespace skerry::pole
