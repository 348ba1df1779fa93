#include "worker/task_evaluation.h"

#include <cmath>
#include <limits>
#include <memory>

#include "absl/status/status.h"
#include "gmock/gmock.h"
#include "gtest/gtest.h"

namespace skerry::worker {
namespace {

using skerry::v1::Task;
using ::testing::HasSubstr;

Task MakeTask(const std::string& function, std::vector<double> genes) {
  Task task;
  task.set_task_id(9);
  task.set_attempt(2);
  task.set_eval_seed(77);
  task.mutable_evaluator()->mutable_builtin()->set_function(function);
  for (double g : genes) task.add_genes(g);
  return task;
}

class Fixed : public Evaluator {
 public:
  explicit Fixed(absl::StatusOr<double> value) : value_(std::move(value)) {}
  absl::StatusOr<double> Evaluate(absl::Span<const double>,
                                  uint64_t seed) override {
    last_seed = seed;
    return value_;
  }
  uint64_t last_seed = 0;

 private:
  absl::StatusOr<double> value_;
};

TEST(EvaluateTaskTest, SphereScoreIsTheSumOfSquares) {
  EvaluatorCache cache(nullptr);  // MakeEvaluator
  const skerry::v1::TaskResult r =
      EvaluateTask(MakeTask("sphere", {1.0, -2.0, 0.5}), cache, Clock::Real());
  EXPECT_EQ(r.task_id(), 9u);
  EXPECT_EQ(r.attempt(), 2u);
  EXPECT_EQ(r.error(), "");
  // Sphere: sum x_i^2 (Jamil & Yang 2013): 1 + 4 + 0.25.
  EXPECT_DOUBLE_EQ(r.score(), 5.25);
}

TEST(EvaluateTaskTest, BuiltinMetricsTravelWithTheResult) {
  EvaluatorCache cache(nullptr);  // MakeEvaluator
  const skerry::v1::TaskResult r =
      EvaluateTask(MakeTask("sphere", {1.0, -2.0, 0.5}), cache, Clock::Real());
  ASSERT_EQ(r.metrics().count("distance_to_optimum"), 1u);
  // sqrt(5.25): the distance from the origin, sphere's minimiser.
  EXPECT_DOUBLE_EQ(r.metrics().at("distance_to_optimum"), std::sqrt(5.25));
  EXPECT_EQ(r.metrics().at("genes_outside_domain"), 0.0);
}

TEST(EvaluateTaskTest, EvalSecondsComesFromTheClock) {
  FakeClock clock;
  class Slow : public Evaluator {
   public:
    explicit Slow(FakeClock* c) : clock_(c) {}
    absl::StatusOr<double> Evaluate(absl::Span<const double>,
                                    uint64_t) override {
      clock_->Advance(absl::Milliseconds(1500));
      return 1.0;
    }

   private:
    FakeClock* clock_;
  };
  EvaluatorCache cache([&](const skerry::v1::EvaluatorSpec&)
                           -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    return std::make_unique<Slow>(&clock);
  });
  const auto r = EvaluateTask(MakeTask("sphere", {1.0}), cache, &clock);
  EXPECT_DOUBLE_EQ(r.eval_seconds(), 1.5);
}

TEST(EvaluateTaskTest, UnknownFunctionIsAnErrorNamingIt) {
  EvaluatorCache cache(nullptr);
  const auto r =
      EvaluateTask(MakeTask("warp_drive", {1.0}), cache, Clock::Real());
  EXPECT_THAT(r.error(), HasSubstr("warp_drive"));
  EXPECT_EQ(r.score(), 0.0);
}

TEST(EvaluateTaskTest, NonFiniteScoresAreErrors) {
  for (double bad : {std::nan(""), std::numeric_limits<double>::infinity(),
                     -std::numeric_limits<double>::infinity()}) {
    SCOPED_TRACE(bad);
    EvaluatorCache cache([bad](const skerry::v1::EvaluatorSpec&)
                             -> absl::StatusOr<std::unique_ptr<Evaluator>> {
      return std::make_unique<Fixed>(bad);
    });
    const auto r =
        EvaluateTask(MakeTask("sphere", {1.0}), cache, Clock::Real());
    EXPECT_THAT(r.error(), HasSubstr("non-finite score"));
  }
}

TEST(EvaluateTaskTest, FailedEvaluationKeepsItsMessage) {
  EvaluatorCache cache([](const skerry::v1::EvaluatorSpec&)
                           -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    return std::make_unique<Fixed>(
        absl::UnavailableError("licence server down"));
  });
  const auto r = EvaluateTask(MakeTask("sphere", {1.0}), cache, Clock::Real());
  EXPECT_EQ(r.error(), "licence server down");
}

TEST(EvaluatorCacheTest, MakesOneEvaluatorPerDistinctSpec) {
  int made = 0;
  Fixed* last = nullptr;
  EvaluatorCache cache([&](const skerry::v1::EvaluatorSpec&)
                           -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    ++made;
    auto e = std::make_unique<Fixed>(3.0);
    last = e.get();
    return e;
  });
  EvaluateTask(MakeTask("sphere", {1.0}), cache, Clock::Real());
  EvaluateTask(MakeTask("sphere", {2.0}), cache, Clock::Real());
  EXPECT_EQ(made, 1);
  EXPECT_EQ(last->last_seed, 77u);  // the task's eval_seed is passed through
  EvaluateTask(MakeTask("rastrigin", {1.0}), cache, Clock::Real());
  EXPECT_EQ(made, 2);
}

TEST(EvaluatorCacheTest, AFactoryFailureIsRememberedAndReported) {
  int made = 0;
  EvaluatorCache cache([&](const skerry::v1::EvaluatorSpec&)
                           -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    ++made;
    return absl::InvalidArgumentError("evaluator.builtin.function: bad");
  });
  for (int i = 0; i < 3; ++i) {
    const auto r = EvaluateTask(MakeTask("x", {1.0}), cache, Clock::Real());
    EXPECT_EQ(r.error(), "evaluator.builtin.function: bad");
  }
  EXPECT_EQ(made, 1);
}

// An evaluator that counts the live instances (for the cache's limits).
class Counted : public Evaluator {
 public:
  explicit Counted(int* live) : live_(live) { ++*live_; }
  ~Counted() override { --*live_; }
  absl::StatusOr<double> Evaluate(absl::Span<const double>, uint64_t) override {
    return 1.0;
  }

 private:
  int* live_;
};

TEST(EvaluatorCacheTest, UnusedEvaluatorIsDroppedAfterTheIdleTime) {
  FakeClock clock;
  int live = 0;
  CacheLimits limits;
  limits.max_idle = absl::Minutes(5);
  EvaluatorCache cache(
      [&](const skerry::v1::EvaluatorSpec&)
          -> absl::StatusOr<std::unique_ptr<Evaluator>> {
        return std::make_unique<Counted>(&live);
      },
      &clock, limits);
  EvaluateTask(MakeTask("sphere", {1.0}), cache, &clock);
  EvaluateTask(MakeTask("rastrigin", {1.0}), cache, &clock);
  EXPECT_EQ(live, 2);
  clock.Advance(absl::Minutes(3));
  EvaluateTask(MakeTask("sphere", {1.0}), cache, &clock);  // used again
  clock.Advance(absl::Minutes(3));
  cache.ReapIdle();
  EXPECT_EQ(live, 1) << "rastrigin was idle for 6 minutes, sphere for 3";
  EXPECT_EQ(cache.TimeToNextExpiry(), absl::Minutes(2) + absl::Milliseconds(1));
  clock.Advance(absl::Minutes(3));
  cache.ReapIdle();
  EXPECT_EQ(live, 0);
  EXPECT_EQ(cache.size(), 0u);
}

TEST(EvaluatorCacheTest, KeepsAtMostMaxEntriesDroppingTheLeastRecentlyUsed) {
  FakeClock clock;
  int live = 0;
  int made = 0;
  CacheLimits limits;
  limits.max_entries = 2;
  EvaluatorCache cache(
      [&](const skerry::v1::EvaluatorSpec&)
          -> absl::StatusOr<std::unique_ptr<Evaluator>> {
        ++made;
        return std::make_unique<Counted>(&live);
      },
      &clock, limits);
  for (const char* f : {"sphere", "rastrigin", "sphere", "ackley"}) {
    clock.Advance(absl::Seconds(1));
    EvaluateTask(MakeTask(f, {1.0}), cache, &clock);
    EXPECT_LE(live, 2);
  }
  EXPECT_EQ(made, 3);
  // rastrigin was the least recently used: made again; sphere was kept.
  EvaluateTask(MakeTask("sphere", {1.0}), cache, &clock);
  EXPECT_EQ(made, 3);
  EvaluateTask(MakeTask("rastrigin", {1.0}), cache, &clock);
  EXPECT_EQ(made, 4);
  EXPECT_EQ(live, 2);
}

}  // namespace
}  // namespace skerry::worker
