// Table tests for DecideIslandStep (server/engine/island_step.h): what an
// island does next, for every stop rule and the migration wait.
#include "server/engine/island_step.h"

#include <string>
#include <vector>

#include "gtest/gtest.h"

namespace skerry::engine {
namespace {

// A complete generation 4 of an island with no limits hit.
IslandFacts Complete() {
  IslandFacts f;
  f.generation = 4;
  f.has_best = true;
  f.max_generations = 100;
  f.evaluations = 50;
  return f;
}

struct Case {
  std::string name;
  IslandFacts facts;
  IslandAction action;
  std::string reason;
  std::optional<uint32_t> new_stop;
};

TEST(IslandStepTest, EveryRuleInItsOrder) {
  std::vector<Case> cases;
  auto add = [&](std::string name, auto change, IslandAction action,
                 std::string reason = "",
                 std::optional<uint32_t> stop = std::nullopt) {
    IslandFacts f = Complete();
    change(f);
    cases.push_back({std::move(name), f, action, std::move(reason), stop});
  };
  add(
      "breeds a complete generation", [](IslandFacts&) {},
      IslandAction::kBreed);
  add(
      "a done island does nothing", [](IslandFacts& f) { f.done = true; },
      IslandAction::kNone);
  add(
      "a done island past the stop generation does nothing",
      [](IslandFacts& f) {
        f.done = true;
        f.run_stop_generation = 2;
      },
      IslandAction::kNone);
  add(
      "waits while evaluating", [](IslandFacts& f) { f.evaluating = true; },
      IslandAction::kNone);
  add(
      "discards a generation past the run's stop, even while evaluating",
      [](IslandFacts& f) {
        f.evaluating = true;
        f.run_stop_generation = 3;
      },
      IslandAction::kDiscard);
  add(
      "finishes at the run's stop generation",
      [](IslandFacts& f) { f.run_stop_generation = 4; }, IslandAction::kFinish,
      "target score reached at generation 4");
  add(
      "the run's stop generation waits for evaluation",
      [](IslandFacts& f) {
        f.run_stop_generation = 4;
        f.evaluating = true;
      },
      IslandAction::kNone);
  add(
      "reaching the target sets the stop generation",
      [](IslandFacts& f) { f.meets_target = true; }, IslandAction::kFinish,
      "target score reached at generation 4", 4u);
  add(
      "a target met with nothing evaluated does not count",
      [](IslandFacts& f) {
        f.meets_target = true;
        f.has_best = false;
      },
      IslandAction::kBreed);
  add(
      "an earlier stop generation wins over the target",
      [](IslandFacts& f) {
        f.meets_target = true;
        f.run_stop_generation = 4;
      },
      IslandAction::kFinish, "target score reached at generation 4");
  add(
      "generation limit: the last generation is limit - 1",
      [](IslandFacts& f) { f.max_generations = 5; }, IslandAction::kFinish,
      "generation limit (5) reached");
  add(
      "generation limit not yet", [](IslandFacts& f) { f.max_generations = 6; },
      IslandAction::kBreed);
  add(
      "no generation limit", [](IslandFacts& f) { f.max_generations = 0; },
      IslandAction::kBreed);
  add(
      "the target wins over the generation limit",
      [](IslandFacts& f) {
        f.max_generations = 5;
        f.meets_target = true;
      },
      IslandAction::kFinish, "target score reached at generation 4", 4u);
  add(
      "evaluation budget: the island's share reached",
      [](IslandFacts& f) {
        f.max_evaluations = 200;
        f.evaluation_share = 50;
      },
      IslandAction::kFinish, "evaluation budget (200) reached");
  add(
      "evaluation budget: share not reached",
      [](IslandFacts& f) {
        f.max_evaluations = 200;
        f.evaluation_share = 51;
      },
      IslandAction::kBreed);
  add(
      "no budget: the share is not looked at",
      [](IslandFacts& f) { f.evaluation_share = 0; }, IslandAction::kBreed);
  add(
      "the generation limit wins over the budget",
      [](IslandFacts& f) {
        f.max_generations = 5;
        f.max_evaluations = 200;
        f.evaluation_share = 10;
      },
      IslandAction::kFinish, "generation limit (5) reached");
  add(
      "wall time up: finishes at the generation boundary",
      [](IslandFacts& f) {
        f.wall_time_up = true;
        f.max_wall_seconds = 2.5;
      },
      IslandAction::kFinish, "wall-time limit (2.5 s) reached");
  add(
      "the budget wins over the wall time",
      [](IslandFacts& f) {
        f.wall_time_up = true;
        f.max_evaluations = 200;
        f.evaluation_share = 50;
      },
      IslandAction::kFinish, "evaluation budget (200) reached");
  add(
      "wall time waits for the generation to complete",
      [](IslandFacts& f) {
        f.wall_time_up = true;
        f.evaluating = true;
      },
      IslandAction::kNone);
  add(
      "waits for a migration source",
      [](IslandFacts& f) { f.migrants_missing = true; }, IslandAction::kWait);
  add(
      "a finishing island does not wait for migrants",
      [](IslandFacts& f) {
        f.migrants_missing = true;
        f.max_generations = 5;
      },
      IslandAction::kFinish, "generation limit (5) reached");

  for (const Case& c : cases) {
    SCOPED_TRACE(c.name);
    const IslandDecision d = DecideIslandStep(c.facts);
    EXPECT_EQ(d.action, c.action);
    EXPECT_EQ(d.reason, c.reason);
    EXPECT_EQ(d.new_stop, c.new_stop);
  }
}

}  // namespace
}  // namespace skerry::engine
