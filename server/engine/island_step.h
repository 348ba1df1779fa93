// What an island does next: a pure function of the facts the engine gathers.
//
// The engine calls DecideIslandStep whenever results or a neighbour's progress
// may have changed an island's situation, and carries out the answer:
//   kNone     nothing to do: the island is done, or still being evaluated
//   kDiscard  it was bred past the run's stop generation (a faster island
//             reached the target): drop its pending work, mark it done
//   kFinish   its generation is complete and a stop rule holds (`reason` says
//             which; `new_stop` is set when this generation reached the
//             target score and so sets the run's stop generation)
//   kWait     complete, but a migration source has not completed the
//             generation the migrants come from (reproducible mode)
//   kBreed    complete: tell the strategy the scores and ask for the next
// Stop rules in order: the run's stop generation, the target score, the
// generation limit, the island's share of the evaluation budget, the run's
// wall time (not reproducible).
//
// Thread safety: a pure function; call from any thread.
#ifndef SKERRY_SERVER_ENGINE_ISLAND_STEP_H_
#define SKERRY_SERVER_ENGINE_ISLAND_STEP_H_

#include <cstdint>
#include <optional>
#include <string>

namespace skerry::engine {

enum class IslandAction { kNone, kDiscard, kFinish, kWait, kBreed };

struct IslandFacts {
  bool done = false;
  bool evaluating = false;  // some genome of the current generation is pending
  uint32_t generation = 0;  // the current generation
  std::optional<uint32_t> run_stop_generation;
  // Of the current generation, once complete:
  bool has_best = false;  // some genome evaluated successfully
  bool meets_target = false;
  uint32_t max_generations = 0;  // 0: no limit
  uint64_t max_evaluations = 0;  // the run's budget; 0: no limit
  uint64_t evaluations = 0;  // the island's, including the current generation
  uint64_t evaluation_share = 0;  // the island's share of the budget
  // The run's wall-time limit (max_wall_seconds, not 0) has passed.
  bool wall_time_up = false;
  double max_wall_seconds = 0;
  // A migration source has not completed the generation migrants come from.
  bool migrants_missing = false;
};

struct IslandDecision {
  IslandAction action = IslandAction::kNone;
  std::string reason;  // kFinish: the stop rule, as the run's message says it
  std::optional<uint32_t> new_stop;
};

IslandDecision DecideIslandStep(const IslandFacts& facts);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_ISLAND_STEP_H_
