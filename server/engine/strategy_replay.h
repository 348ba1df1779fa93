// The strategy state of every island of a stored run as it was when the run
// produced one of its generations: what a fork at that generation starts
// from (Engine::Fork, engine_fork.cc), and what an extended run goes on from
// where the finish trimmed the generation its stored state was of
// (Engine::Extend, engine_series.cc).
//
// The store keeps one strategy state per island, the newest
// (strategy_states, schema version 10), so an earlier one is rebuilt by
// replay: a strategy made from the run's spec is Start()ed, then told each
// stored generation 0 .. g-1 with its stored scores and the migrants the
// engine chose from the stored generations of the source islands, and asked
// for the next. Every generation it produces must equal the stored one
// (slot, origin, parent links, genes bit for bit); the first difference is
// an error naming the run, island, generation and slot, and nothing is
// forked. A run that is itself a fork is replayed from its parent's state at
// its fork generation, recursively, and then over its own generations with
// its own spec.
//
// Why replay rather than a stored state per generation: it needs no schema
// change, costs nothing while runs go (a full CMA-ES state of a
// 1000-gene island is 8 MB, and would be written with every generation), and
// it works for every strategy behind strategy.h, whatever its state, because
// it uses nothing but that interface; the genome comparison proves the state
// is the one the run had (invariant 4: genomes are a pure function of spec
// and seed). Its price is the time of the fork, about that of breeding the
// run's generations again, paid once per fork. Strategies whose state is
// their population (Strategy::StateIsPopulation, the GA) skip the replay.
//
// Asynchronous island runs are not reproducible (their migrants depend on
// timing), so their strategies cannot be replayed: FailedPrecondition.
//
// Thread safety: a pure function of the store's checked reads; any thread.
#ifndef SKERRY_SERVER_ENGINE_STRATEGY_REPLAY_H_
#define SKERRY_SERVER_ENGINE_STRATEGY_REPLAY_H_

#include <cstdint>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "absl/types/span.h"
#include "server/store/store.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::engine {

// Island i's state (index i) as `run` had it when it produced `generation`.
// `run.spec` must be the spec the run was made with. FailedPrecondition when
// the run cannot be replayed (asynchronous islands, generations not stored,
// a regenerated genome that differs); DataLoss from damaged rows.
absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run, uint32_t generation);

// The same with a generation per island (index i for island i): what an
// extension of an ended run starts from, where a run ended by its target
// score may have left its islands at different generations. One entry per
// island, else InvalidArgument.
absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run,
    absl::Span<const uint32_t> generations);

// Each island's state (serialised, index i for island i) as the ended `run`
// had it when it produced the generation the island is at now: what
// Engine::Extend goes on from. The stored state serves where it is of that
// generation (states are committed with the generation they produce, and an
// island that finishes stores none); an island whose stored state is of a
// generation trimmed at the finish (it bred past the run's stop generation)
// has it rebuilt by replay, with the errors of ReplayStrategyStates.
absl::StatusOr<std::vector<std::string>> StatesToGoOn(
    store::Store& store, const store::RunRecord& run);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_STRATEGY_REPLAY_H_
