// Tests for the built-in benchmark functions (common/evaluator.h). Definitions,
// domains and minima: Jamil & Yang 2013, "A literature survey of benchmark
// functions for global optimisation problems", IJMMNO 4(2):150-194.
#include "common/evaluator.h"

#include <cmath>
#include <limits>
#include <string>
#include <vector>

#include "gtest/gtest.h"

namespace skerry {
namespace {

double Eval(absl::string_view name, std::vector<double> x) {
  const BuiltinFunction* f = FindBuiltin(name);
  EXPECT_NE(f, nullptr) << name;
  return f == nullptr ? std::nan("") : f->fn(x);
}

TEST(BuiltinFunctionTest, RastriginWorkedValues) {
  // Jamil & Yang 2013 (REFERENCES.md): f(0.5, 0) = 20.25, f(1, 1) = 2, f(0) =
  // 0.
  EXPECT_NEAR(Eval("rastrigin", {0.5, 0.0}), 20.25, 1e-12);
  EXPECT_NEAR(Eval("rastrigin", {1.0, 1.0}), 2.0, 1e-12);
  EXPECT_NEAR(Eval("rastrigin", {0.0, 0.0, 0.0}), 0.0, 1e-12);
}

TEST(BuiltinFunctionTest, SphereIsSumOfSquares) {
  // Jamil & Yang 2013: sum x_i^2.
  EXPECT_DOUBLE_EQ(Eval("sphere", {1.0, -2.0, 3.0}), 14.0);
  EXPECT_DOUBLE_EQ(Eval("sphere", {0.0, 0.0}), 0.0);
}

TEST(BuiltinFunctionTest, SchwefelMinimumIsNearlyZero) {
  // Jamil & Yang 2013; minimum 1.2728e-5 d at x_i = 420.968746 (derived,
  // REFERENCES.md).
  for (int d : {1, 2, 10}) {
    SCOPED_TRACE(d);
    const double v = Eval("schwefel", std::vector<double>(d, 420.968746));
    EXPECT_NEAR(v, 1.2728e-5 * d, 1e-8 * d);
  }
}

TEST(BuiltinFunctionTest, StyblinskiTangMinimum) {
  // Jamil & Yang 2013; -39.16616570 d at x_i = -2.903534028 (derived,
  // REFERENCES.md).
  for (int d : {1, 2, 5}) {
    SCOPED_TRACE(d);
    const double v =
        Eval("styblinski_tang", std::vector<double>(d, -2.903534028));
    EXPECT_NEAR(v, -39.16616570 * d, 1e-7 * d);
  }
}

TEST(BuiltinFunctionTest, AckleyIsZeroAtOriginUpToRounding) {
  // Jamil & Yang 2013: 0 at 0 (about 4e-16 in doubles, REFERENCES.md).
  const double v = Eval("ackley", {0.0, 0.0, 0.0});
  EXPECT_GE(v, 0.0);
  EXPECT_LT(v, 1e-15);
  EXPECT_GT(Eval("ackley", {1.0, 1.0}), 1.0);
}

TEST(BuiltinFunctionTest, RosenbrockIsZeroAtOnes) {
  // Jamil & Yang 2013: 0 at (1, ..., 1); f(0, 0) = 1 by the definition.
  EXPECT_DOUBLE_EQ(Eval("rosenbrock", {1.0, 1.0, 1.0, 1.0}), 0.0);
  EXPECT_DOUBLE_EQ(Eval("rosenbrock", {0.0, 0.0}), 1.0);
}

TEST(BuiltinFunctionTest, GriewankIsZeroAtOrigin) {
  // Jamil & Yang 2013: 0 at 0.
  EXPECT_NEAR(Eval("griewank", {0.0, 0.0, 0.0}), 0.0, 1e-15);
  EXPECT_GT(Eval("griewank", {10.0, -10.0}), 0.0);
}

TEST(BuiltinFunctionTest, DomainsMatchTheSurvey) {
  // Jamil & Yang 2013 (table in REFERENCES.md); "zero" is our benchmark helper.
  struct Row {
    const char* name;
    double lower, upper;
  };
  const Row rows[] = {
      {"sphere", -5.12, 5.12},        {"rastrigin", -5.12, 5.12},
      {"rosenbrock", -5.0, 10.0},     {"ackley", -32.768, 32.768},
      {"griewank", -600.0, 600.0},    {"schwefel", -500.0, 500.0},
      {"styblinski_tang", -5.0, 5.0}, {"zero", -1.0, 1.0},
  };
  for (const Row& row : rows) {
    SCOPED_TRACE(row.name);
    const BuiltinFunction* f = FindBuiltin(row.name);
    ASSERT_NE(f, nullptr);
    EXPECT_EQ(f->lower, row.lower);
    EXPECT_EQ(f->upper, row.upper);
  }
}

TEST(BuiltinFunctionTest, NamesAreStableAndFindable) {
  const std::vector<std::string> expected = {
      "sphere",   "rastrigin", "rosenbrock",      "ackley",
      "griewank", "schwefel",  "styblinski_tang", "zero"};
  EXPECT_EQ(BuiltinNames(), expected);
  for (const std::string& name : expected)
    EXPECT_NE(FindBuiltin(name), nullptr);
  EXPECT_EQ(FindBuiltin("Sphere"), nullptr);
  EXPECT_EQ(FindBuiltin(""), nullptr);
}

TEST(MakeEvaluatorTest, BuildsBuiltinThatScores) {
  skerry::v1::EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("rastrigin");
  auto evaluator = MakeEvaluator(spec);
  ASSERT_TRUE(evaluator.ok()) << evaluator.status();
  const std::vector<double> x = {1.0, 1.0};
  auto score = (*evaluator)->Evaluate(x, 123);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_NEAR(*score, 2.0, 1e-12);
}

TEST(MakeEvaluatorTest, ZeroEvaluatorScoresZero) {
  skerry::v1::EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("zero");
  auto evaluator = MakeEvaluator(spec);
  ASSERT_TRUE(evaluator.ok());
  const std::vector<double> x = {0.3, -0.7};
  EXPECT_EQ(*(*evaluator)->Evaluate(x, 0), 0.0);
}

TEST(MakeEvaluatorTest, UnknownFunctionNamesFieldAndChoices) {
  skerry::v1::EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("spherical");
  auto evaluator = MakeEvaluator(spec);
  ASSERT_FALSE(evaluator.ok());
  EXPECT_EQ(evaluator.status().code(), absl::StatusCode::kInvalidArgument);
  EXPECT_EQ(evaluator.status().message(),
            "evaluator.builtin.function: unknown function \"spherical\" "
            "(allowed: sphere, rastrigin, rosenbrock, ackley, griewank, "
            "schwefel, styblinski_tang, zero)");
}

TEST(MakeEvaluatorTest, MissingKindIsAnError) {
  auto evaluator = MakeEvaluator(skerry::v1::EvaluatorSpec());
  ASSERT_FALSE(evaluator.ok());
  EXPECT_EQ(evaluator.status().code(), absl::StatusCode::kInvalidArgument);
  // Says what is missing, not `unknown function ""`.
  EXPECT_NE(evaluator.status().message().find("evaluator: missing"),
            absl::string_view::npos)
      << evaluator.status().message();
}

TEST(MakeEvaluatorTest, EmptyOrNonFiniteGenesFailTheAttempt) {
  skerry::v1::EvaluatorSpec spec;
  spec.mutable_builtin()->set_function("sphere");
  auto evaluator = MakeEvaluator(spec);
  ASSERT_TRUE(evaluator.ok());
  EXPECT_FALSE((*evaluator)->Evaluate({}, 0).ok());
  const std::vector<double> bad = {1.0,
                                   std::numeric_limits<double>::quiet_NaN()};
  auto score = (*evaluator)->Evaluate(bad, 0);
  ASSERT_FALSE(score.ok());
  EXPECT_NE(score.status().message().find("gene 1"), absl::string_view::npos);
}

}  // namespace
}  // namespace skerry
