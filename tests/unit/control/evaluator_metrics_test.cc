// The built-in evaluators' named metrics (Evaluator::LastMetrics, issue 15):
// the pole balancers' steps balanced, largest pole angle and cart travel, and
// the benchmark functions' distance to the known optimum and genes outside
// the usual domain. Domains and minimisers: Jamil & Yang 2013 (REFERENCES.md);
// pole limits: Barto, Sutton & Anderson 1983 (12 degrees, 2.4 m) and Wieland
// 1991 as used by Gruau et al. 1996 (36 degrees).
#include <cmath>
#include <map>
#include <memory>
#include <string>
#include <vector>

#include "common/evaluator.h"
#include "common/pole.h"
#include "common/spec.h"
#include "gtest/gtest.h"

namespace skerry {
namespace {

std::unique_ptr<Evaluator> Builtin(const std::string& function) {
  skerry::v1::EvaluatorSpec spec;
  spec.mutable_builtin()->set_function(function);
  absl::StatusOr<std::unique_ptr<Evaluator>> ev = MakeEvaluator(spec);
  EXPECT_TRUE(ev.ok()) << ev.status();
  return ev.ok() ? *std::move(ev) : nullptr;
}

double Metric(const Evaluator& ev, const std::string& name) {
  auto it = ev.LastMetrics().find(name);
  EXPECT_NE(it, ev.LastMetrics().end()) << "no metric " << name;
  return it == ev.LastMetrics().end() ? std::nan("") : it->second;
}

TEST(BuiltinMetricsTest, DistanceToOptimumIsEuclideanFromTheMinimiser) {
  std::unique_ptr<Evaluator> sphere = Builtin("sphere");
  ASSERT_NE(sphere, nullptr);
  ASSERT_TRUE(sphere->Evaluate(std::vector<double>{3.0, 4.0}, 0).ok());
  EXPECT_DOUBLE_EQ(Metric(*sphere, "distance_to_optimum"), 5.0);  // 3-4-5 [D]
  EXPECT_EQ(Metric(*sphere, "genes_outside_domain"), 0.0);

  // Rosenbrock's minimiser is (1, ..., 1) (Jamil & Yang 2013).
  std::unique_ptr<Evaluator> rosenbrock = Builtin("rosenbrock");
  ASSERT_NE(rosenbrock, nullptr);
  absl::StatusOr<double> at_min =
      rosenbrock->Evaluate(std::vector<double>{1.0, 1.0, 1.0}, 0);
  ASSERT_TRUE(at_min.ok());
  EXPECT_EQ(*at_min, 0.0);
  EXPECT_EQ(Metric(*rosenbrock, "distance_to_optimum"), 0.0);

  // Schwefel 2.26: x_i = 420.968746 (REFERENCES.md [D]).
  std::unique_ptr<Evaluator> schwefel = Builtin("schwefel");
  ASSERT_NE(schwefel, nullptr);
  ASSERT_TRUE(
      schwefel->Evaluate(std::vector<double>{420.968746, 420.968746}, 0).ok());
  EXPECT_NEAR(Metric(*schwefel, "distance_to_optimum"), 0.0, 1e-9);
}

TEST(BuiltinMetricsTest, GenesOutsideTheUsualDomainAreCounted) {
  // Schwefel's function scores below its true minimum outside [-500, 500]:
  // f(-600) in one dimension is 418.9829 + 600 sin(sqrt(600)) < 0 [D].
  std::unique_ptr<Evaluator> schwefel = Builtin("schwefel");
  ASSERT_NE(schwefel, nullptr);
  absl::StatusOr<double> outside =
      schwefel->Evaluate(std::vector<double>{-600.0, 0.0, 10.0}, 0);
  ASSERT_TRUE(outside.ok());
  EXPECT_EQ(Metric(*schwefel, "genes_outside_domain"), 1.0);
  std::unique_ptr<Evaluator> sphere = Builtin("sphere");
  ASSERT_TRUE(sphere->Evaluate(std::vector<double>{5.2, -5.13, 5.12}, 0).ok());
  EXPECT_EQ(Metric(*sphere, "genes_outside_domain"), 2.0);  // |x| <= 5.12
}

TEST(BuiltinMetricsTest, ZeroReturnsNoMetrics) {
  std::unique_ptr<Evaluator> zero = Builtin("zero");
  ASSERT_NE(zero, nullptr);
  ASSERT_TRUE(zero->Evaluate(std::vector<double>{0.3}, 0).ok());
  EXPECT_TRUE(zero->LastMetrics().empty());
}

std::unique_ptr<Evaluator> Pole(const std::string& text, uint32_t* genes) {
  absl::StatusOr<skerry::v1::RunSpec> parsed =
      ParseSpecText(text, "metrics.spec");
  EXPECT_TRUE(parsed.ok()) << parsed.status();
  absl::StatusOr<skerry::v1::RunSpec> spec = PrepareSpec(*parsed);
  EXPECT_TRUE(spec.ok()) << spec.status();
  if (!spec.ok()) return nullptr;
  *genes = spec->genome_length();
  absl::StatusOr<std::unique_ptr<Evaluator>> ev =
      MakeEvaluator(spec->evaluator());
  EXPECT_TRUE(ev.ok()) << ev.status();
  return ev.ok() ? *std::move(ev) : nullptr;
}

TEST(PoleMetricsTest, IdleDoublePoleMetricsMatchItsEpisode) {
  uint32_t n = 0;
  std::unique_ptr<Evaluator> ev = Pole("evaluator { double_pole {} }", &n);
  ASSERT_NE(ev, nullptr);
  // A zero network pushes with u = tanh(0) = 0: the long pole, started at 1
  // degree (Gruau et al. 1996), falls past 36 degrees.
  absl::StatusOr<double> score = ev->Evaluate(std::vector<double>(n, 0.0), 3);
  ASSERT_TRUE(score.ok()) << score.status();
  EXPECT_EQ(Metric(*ev, "steps_balanced"), *score);  // step-count fitness
  const double angle = Metric(*ev, "max_pole_angle_deg");
  EXPECT_GE(angle, 1.0);
  EXPECT_LE(angle, 36.0);
  const double travel = Metric(*ev, "max_cart_travel_m");
  EXPECT_GE(travel, 0.0);
  EXPECT_LE(travel, 2.4);

  // The same episode run directly, with its trace.
  struct Idle : pole::Controller {
    void Reset() override {}
    absl::StatusOr<double> Act(absl::Span<const double>) override { return 0; }
  } idle;
  pole::EpisodeTrace trace;
  absl::StatusOr<uint64_t> steps = pole::BalanceDoublePole(
      pole::DoublePoleTask{}, pole::DoublePoleStart(false), 100000, idle,
      &trace);
  ASSERT_TRUE(steps.ok());
  EXPECT_EQ(trace.steps, *steps);
  EXPECT_DOUBLE_EQ(Metric(*ev, "steps_balanced"), static_cast<double>(*steps));
  EXPECT_NEAR(angle, trace.max_pole_angle * 180.0 / M_PI, 1e-9);
}

TEST(PoleMetricsTest, CartPoleStaysWithinTheFailureLimits) {
  uint32_t n = 0;
  std::unique_ptr<Evaluator> ev = Pole(
      "evaluator { cart_pole {} episodes { count: 3 start_noise: 0.05 } }", &n);
  ASSERT_NE(ev, nullptr);
  std::vector<double> genes(n, 0.1);
  ASSERT_TRUE(ev->Evaluate(genes, 11).ok());
  // Means over 3 episodes of values within each episode's balanced states.
  EXPECT_LE(Metric(*ev, "max_pole_angle_deg"), 12.0);
  EXPECT_LE(Metric(*ev, "max_cart_travel_m"), 2.4);
  EXPECT_GE(Metric(*ev, "steps_balanced"), 0.0);
}

}  // namespace
}  // namespace skerry
