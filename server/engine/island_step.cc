#include "server/engine/island_step.h"

#include "absl/strings/str_cat.h"

namespace skerry::engine {

IslandDecision DecideIslandStep(const IslandFacts& f) {
  IslandDecision d;
  if (f.done) return d;
  if (f.run_stop_generation.has_value() &&
      f.generation > *f.run_stop_generation) {
    d.action = IslandAction::kDiscard;
    return d;
  }
  if (f.evaluating) return d;
  const uint32_t g = f.generation;
  if (f.run_stop_generation.has_value() && g >= *f.run_stop_generation) {
    d.reason = absl::StrCat("target score reached at generation ",
                            *f.run_stop_generation);
  } else if (f.has_best && f.meets_target) {
    d.new_stop = g;
    d.reason = absl::StrCat("target score reached at generation ", g);
  } else if (f.max_generations > 0 && g + 1 >= f.max_generations) {
    d.reason =
        absl::StrCat("generation limit (", f.max_generations, ") reached");
  } else if (f.max_evaluations > 0 && f.evaluations >= f.evaluation_share) {
    d.reason =
        absl::StrCat("evaluation budget (", f.max_evaluations, ") reached");
  } else if (f.wall_time_up) {
    d.reason =
        absl::StrCat("wall-time limit (", f.max_wall_seconds, " s) reached");
  }
  if (!d.reason.empty()) {
    d.action = IslandAction::kFinish;
    return d;
  }
  d.action = f.migrants_missing ? IslandAction::kWait : IslandAction::kBreed;
  return d;
}

}  // namespace skerry::engine
