// The strategy state of every island of a stored run as it was when the run
// produced one of its generations: what a fork at that generation starts
// from (Engine::Fork, engine_fork.cc).
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
#include <vector>

#include "absl/status/statusor.h"
#include "server/store/store.h"
#include "skerry/v1/strategy.pb.h"

namespace skerry::engine {

// Island i's state (index i) as `run` had it when it produced `generation`.
// `run.spec` must be the spec the run was made with. FailedPrecondition when
// the run cannot be replayed (asynchronous islands, generations not stored,
// a regenerated genome that differs); DataLoss from damaged rows.
absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run, uint32_t generation);

}  // namespace skerry::engine

#endif  // SKERRY_SERVER_ENGINE_STRATEGY_REPLAY_H_
