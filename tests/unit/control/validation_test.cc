// Held-out validation cases (common/validation.h): the spec check, the cases
// and their seeds, and how case scores combine.
#include "common/validation.h"

#include <map>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "common/evaluator.h"
#include "common/pole.h"
#include "common/spec.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

using skerry::v1::RunSpec;
using ::testing::HasSubstr;

absl::StatusOr<RunSpec> Prepare(const std::string& text) {
  absl::StatusOr<RunSpec> spec = ParseSpecText(text, "test.spec");
  if (!spec.ok()) return spec.status();
  return PrepareSpec(*spec);
}

constexpr char kExternal[] =
    "genome_length: 2 lower_bound: -1 upper_bound: 1 "
    "evaluator { external { argv: \"/bin/true\" } validation { %s } }";

std::string External(const std::string& validation) {
  std::string out = kExternal;
  out.replace(out.find("%s"), 2, validation);
  return out;
}

// Scores each case by a table of names; records what it was asked.
class TableEvaluator : public Evaluator {
 public:
  explicit TableEvaluator(std::map<std::string, double> scores)
      : scores_(std::move(scores)) {}
  absl::StatusOr<double> Evaluate(absl::Span<const double>, uint64_t) override {
    return absl::InternalError("training is not what this test asks for");
  }
  absl::StatusOr<double> EvaluateCase(absl::Span<const double>,
                                      const std::string& name,
                                      uint64_t seed) override {
    asked.push_back({name, seed});
    auto it = scores_.find(name);
    if (it == scores_.end()) return absl::UnknownError("no such day");
    return it->second;
  }
  std::vector<ValidationCase> asked;

 private:
  std::map<std::string, double> scores_;
};

TEST(ValidationSpecTest, DefaultsAreEveryGenerationAndTheMean) {
  absl::StatusOr<RunSpec> spec = Prepare(External("cases: \"dry\""));
  ASSERT_TRUE(spec.ok()) << spec.status();
  EXPECT_EQ(spec->evaluator().validation().champions(),
            skerry::v1::EVERY_GENERATION);
  EXPECT_EQ(spec->evaluator().validation().aggregate(),
            skerry::v1::AGGREGATE_MEAN);
}

TEST(ValidationSpecTest, BadDeclarationsNameTheField) {
  const std::vector<std::pair<std::string, std::string>> cases = {
      {External(""), "evaluator.validation: no cases"},
      {External("cases: \"\""), "evaluator.validation.cases[0]: a case name"},
      {External("cases: \"a\" cases: \"a\""),
       "evaluator.validation.cases[1]: \"a\" is listed twice"},
      {External("seeds: 3 seeds: 3"),
       "evaluator.validation.seeds[1]: 3 is listed twice"},
      {External("cases: \"seed-4\""), "kept for seeded cases"},
      {External("cases: \"tab\\there\""), "control characters"},
      {External("generalisation: true"), "evaluator.validation.generalisation"},
      {External("cases: \"x\" champions: 9"),
       "evaluator.validation.champions: unknown value 9"},
      {"genome_length: 2 evaluator { builtin { function: \"sphere\" } "
       "validation { cases: \"x\" } }",
       "built-in functions have no held-out cases"},
      {"evaluator { cart_pole {} validation { cases: \"x\" } }",
       "pole evaluators validate on the generalisation starts only"},
      {"evaluator { cart_pole {} validation { } }",
       "evaluator.validation.generalisation"},
  };
  for (const auto& [text, want] : cases) {
    SCOPED_TRACE(text);
    absl::StatusOr<RunSpec> spec = Prepare(text);
    ASSERT_FALSE(spec.ok());
    EXPECT_EQ(spec.status().code(), absl::StatusCode::kInvalidArgument);
    EXPECT_THAT(std::string(spec.status().message()), HasSubstr(want));
  }
}

TEST(ValidationSpecTest, TooManyCasesAreRefused) {
  std::string seeds;
  for (size_t i = 0; i <= kMaxValidationCases; ++i) {
    absl::StrAppend(&seeds, "seeds: ", i, " ");
  }
  absl::StatusOr<RunSpec> spec = Prepare(External(seeds));
  ASSERT_FALSE(spec.ok());
  EXPECT_THAT(std::string(spec.status().message()), HasSubstr("at most 10000"));
}

TEST(ValidationCasesTest, PoleCasesAreTheSixHundredTwentyFiveStarts) {
  absl::StatusOr<RunSpec> spec =
      Prepare("evaluator { cart_pole {} validation { generalisation: true } }");
  ASSERT_TRUE(spec.ok()) << spec.status();
  std::vector<ValidationCase> cases = ValidationCases(spec->evaluator(), 5);
  ASSERT_EQ(cases.size(), pole::kGeneralisationStarts);
  EXPECT_EQ(ValidationCaseCount(spec->evaluator()), cases.size());
  EXPECT_EQ(cases.front().name, "start-0");
  EXPECT_EQ(cases.back().name, "start-624");
}

TEST(ValidationCasesTest, NamedCaseSeedsDependOnTheRunSeedOnly) {
  absl::StatusOr<RunSpec> spec =
      Prepare(External("cases: \"dry\" cases: \"wet\" seeds: 77"));
  ASSERT_TRUE(spec.ok()) << spec.status();
  std::vector<ValidationCase> a = ValidationCases(spec->evaluator(), 1);
  std::vector<ValidationCase> b = ValidationCases(spec->evaluator(), 1);
  std::vector<ValidationCase> other = ValidationCases(spec->evaluator(), 2);
  ASSERT_EQ(a.size(), 3u);
  EXPECT_EQ(ValidationCaseCount(spec->evaluator()), 3u);
  EXPECT_EQ(a[0].name, "dry");
  EXPECT_EQ(a[1].name, "wet");
  EXPECT_EQ(a[2].name, "seed-77");
  EXPECT_EQ(a[2].seed, 77u);
  EXPECT_EQ(other[2].seed, 77u);  // a listed seed is used as given
  for (int i = 0; i < 2; ++i) {
    EXPECT_EQ(a[i].seed, b[i].seed);
    EXPECT_NE(a[i].seed, other[i].seed);
  }
  EXPECT_NE(a[0].seed, a[1].seed);
}

TEST(ValidateGenesTest, ExternalCasesCombineByTheDeclaredAggregate) {
  const std::map<std::string, double> table = {
      {"a", 1.0}, {"b", 4.0}, {"c", 10.0}};
  const std::vector<std::pair<std::string, double>> expect = {
      {"", 5.0},  // mean of 1, 4, 10
      {"aggregate: AGGREGATE_MIN", 1.0},
      {"aggregate: AGGREGATE_MEDIAN", 4.0},
  };
  for (const auto& [how, want] : expect) {
    SCOPED_TRACE(how);
    absl::StatusOr<RunSpec> spec = Prepare(
        External(absl::StrCat("cases: \"a\" cases: \"b\" cases: \"c\" ", how)));
    ASSERT_TRUE(spec.ok()) << spec.status();
    TableEvaluator evaluator(table);
    absl::StatusOr<double> score =
        ValidateGenes(evaluator, spec->evaluator(), {0.0, 0.0}, 3);
    ASSERT_TRUE(score.ok()) << score.status();
    EXPECT_DOUBLE_EQ(*score, want);
    ASSERT_EQ(evaluator.asked.size(), 3u);
    EXPECT_EQ(evaluator.asked[1].name, "b");
  }
}

TEST(ValidateGenesTest, AFailingCaseFailsTheValidationNamingIt) {
  absl::StatusOr<RunSpec> spec =
      Prepare(External("cases: \"a\" cases: \"missing\""));
  ASSERT_TRUE(spec.ok()) << spec.status();
  TableEvaluator evaluator({{"a", 1.0}});
  absl::StatusOr<double> score =
      ValidateGenes(evaluator, spec->evaluator(), {0.0, 0.0}, 3);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(std::string(score.status().message()),
              HasSubstr("validation case \"missing\": no such day"));
}

TEST(ValidateGenesTest, NonFiniteCaseScoreIsAFailure) {
  absl::StatusOr<RunSpec> spec = Prepare(External("cases: \"a\""));
  ASSERT_TRUE(spec.ok()) << spec.status();
  TableEvaluator evaluator({{"a", std::nan("")}});
  absl::StatusOr<double> score =
      ValidateGenes(evaluator, spec->evaluator(), {0.0, 0.0}, 3);
  ASSERT_FALSE(score.ok());
  EXPECT_THAT(std::string(score.status().message()), HasSubstr("not a finite"));
}

TEST(ValidateGenesTest, BuiltinFunctionsHaveNoCases) {
  absl::StatusOr<RunSpec> spec = Prepare(
      "genome_length: 2 evaluator { builtin { function: \"sphere\" } }");
  ASSERT_TRUE(spec.ok()) << spec.status();
  absl::StatusOr<std::unique_ptr<Evaluator>> e =
      MakeEvaluator(spec->evaluator());
  ASSERT_TRUE(e.ok()) << e.status();
  absl::StatusOr<double> score = (*e)->EvaluateCase({0.0, 0.0}, "x", 1);
  EXPECT_EQ(score.status().code(), absl::StatusCode::kFailedPrecondition);
}

// The pole validation counts the starts balanced for 1000 steps, the same
// count as the library's generalisation test. All weights zero, derived from
// the equations of motion: the single-pole cart is pushed with a constant
// +/-10 N (bang-bang force of a zero output), which tips the pole from every
// start, so 0; the double pole gets no force at all (10 tanh(0) N), so exactly
// the starts at rest and upright stay balanced: x' = theta_1 = theta_1' = 0,
// the middle grid value of each, with any of the 5 cart positions, so 5.
TEST(ValidateGenesTest, PoleValidationCountsBalancedStarts) {
  const std::vector<std::pair<std::string, double>> runs = {
      {"evaluator { cart_pole { max_steps: 1000 } validation { "
       "generalisation: true } }",
       0.0},
      {"evaluator { double_pole { max_steps: 1000 } validation { "
       "generalisation: true } }",
       5.0},
  };
  for (const auto& [text, at_rest] : runs) {
    SCOPED_TRACE(text);
    absl::StatusOr<RunSpec> spec = Prepare(text);
    ASSERT_TRUE(spec.ok()) << spec.status();
    absl::StatusOr<std::unique_ptr<Evaluator>> e =
        MakeEvaluator(spec->evaluator());
    ASSERT_TRUE(e.ok()) << e.status();
    const std::vector<double> zeros(spec->genome_length(), 0.0);
    absl::StatusOr<double> score =
        ValidateGenes(**e, spec->evaluator(), zeros, 1);
    ASSERT_TRUE(score.ok()) << score.status();
    EXPECT_EQ(*score, at_rest);
    // Genes that push against the lean: compare with the library's count.
    std::vector<double> genes(spec->genome_length(), 0.0);
    for (size_t i = 0; i < genes.size(); ++i) genes[i] = 0.5 + 0.25 * i;
    score = ValidateGenes(**e, spec->evaluator(), genes, 1);
    ASSERT_TRUE(score.ok()) << score.status();
    absl::StatusOr<uint32_t> count =
        pole::GeneralisationTest(spec->evaluator(), genes);
    ASSERT_TRUE(count.ok()) << count.status();
    EXPECT_EQ(*score, static_cast<double>(*count));
    EXPECT_THAT((*e)->EvaluateCase(genes, "start-625", 0).status().message(),
                HasSubstr("no such start"));
    EXPECT_THAT((*e)->EvaluateCase(genes, "heatwave", 0).status().message(),
                HasSubstr("pole evaluators know the cases"));
  }
}

}  // namespace
}  // namespace skerry
