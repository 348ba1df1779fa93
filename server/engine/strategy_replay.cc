// ReplayStrategyStates (strategy_replay.h).
#include "server/engine/strategy_replay.h"

#include <algorithm>
#include <memory>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "server/engine/breeder.h"
#include "server/engine/strategy.h"
#include "server/engine/topology.h"

namespace skerry::engine {
namespace {

using store::GenomeRecord;

// A chain of forks deeper than this is refused rather than recursed into.
constexpr int kMaxForkDepth = 256;

// OK when the regenerated generation equals the stored one.
absl::Status SameGeneration(const store::RunRecord& run, uint32_t island,
                            uint32_t generation,
                            const std::vector<GenomeRecord>& made,
                            const std::vector<GenomeRecord>& stored) {
  auto differs = [&](uint32_t slot, const char* what) {
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run.id, " island ", island, " generation ", generation,
        " slot ", slot,
        ": replaying the strategy does not give the stored "
        "genome (",
        what, "), so its state at that generation cannot be rebuilt"));
  };
  if (made.size() != stored.size()) {
    return absl::FailedPreconditionError(
        absl::StrCat("run ", run.id, " island ", island, " generation ",
                     generation, ": replaying the strategy gives ", made.size(),
                     " genomes where the run holds ", stored.size()));
  }
  for (size_t i = 0; i < made.size(); ++i) {
    const GenomeRecord& a = made[i];
    const GenomeRecord& b = stored[i];
    if (a.slot != b.slot) return differs(b.slot, "its slot differs");
    if (a.origin != b.origin) return differs(b.slot, "its origin differs");
    if (a.parent_a != b.parent_a || a.parent_b != b.parent_b) {
      return differs(b.slot, "its parent links differ");
    }
    if (a.genes != b.genes) return differs(b.slot, "its genes differ");
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<skerry::v1::StrategyState>> Replay(
    store::Store& store, const store::RunRecord& run, uint32_t generation,
    int depth) {
  const skerry::v1::RunSpec& spec = run.spec;
  const uint32_t count = std::max<uint32_t>(1, spec.islands().count());
  std::vector<std::unique_ptr<Strategy>> strategies;
  for (uint32_t i = 0; i < count; ++i) {
    SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<Strategy> s, MakeStrategy(spec, i));
    strategies.push_back(std::move(s));
  }
  if (strategies.front()->StateIsPopulation()) {
    std::vector<skerry::v1::StrategyState> out;
    for (const auto& s : strategies) {
      skerry::v1::StrategyState state = s->Save();
      state.set_generation(generation);
      out.push_back(std::move(state));
    }
    return out;
  }
  if (spec.islands().asynchronous() && count > 1) {
    return absl::FailedPreconditionError(absl::StrCat(
        "islands.asynchronous: run ", run.id,
        " migrates asynchronously, so its generations depend on timing and "
        "its strategy's state at an earlier generation cannot be rebuilt"));
  }

  // The generation the replay starts from, with every island's state there.
  uint32_t first = 0;
  std::vector<GenomeRecord> made;  // of one island, to compare
  if (run.parent_run != 0) {
    if (generation < run.parent_generation) {
      return absl::FailedPreconditionError(absl::StrCat(
          "run ", run.id, " starts at generation ", run.parent_generation,
          " as a fork of run ", run.parent_run, "; it holds no generation ",
          generation));
    }
    if (depth >= kMaxForkDepth) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", run.id, " is a fork more than ", kMaxForkDepth,
                       " forks deep; fork an earlier run of the chain"));
    }
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord parent,
                            store.GetRun(run.parent_run));
    SKERRY_ASSIGN_OR_RETURN(
        std::vector<skerry::v1::StrategyState> start,
        Replay(store, parent, run.parent_generation, depth + 1));
    if (start.size() != count) {
      return absl::FailedPreconditionError(absl::StrCat(
          "run ", run.id, " has ", count, " islands and its parent run ",
          run.parent_run, " ", start.size()));
    }
    for (uint32_t i = 0; i < count; ++i) {
      SKERRY_RETURN_IF_ERROR(strategies[i]->Restore(start[i]));
    }
    first = run.parent_generation;
  } else {
    for (uint32_t i = 0; i < count; ++i) {
      SKERRY_ASSIGN_OR_RETURN(made, strategies[i]->Start());
      SKERRY_ASSIGN_OR_RETURN(std::vector<GenomeRecord> stored,
                              store.GetGeneration(run.id, i, 0));
      SKERRY_RETURN_IF_ERROR(SameGeneration(run, i, 0, made, stored));
    }
  }

  // Generation by generation, all islands together: the migrants of an epoch
  // come from the sources' stored generation h, and each island's stored
  // generation h + 1, once compared, is what it is told next.
  std::vector<std::vector<GenomeRecord>> current(count);
  for (uint32_t i = 0; i < count && first < generation; ++i) {
    SKERRY_ASSIGN_OR_RETURN(current[i], store.GetGeneration(run.id, i, first));
  }
  for (uint32_t h = first; h < generation; ++h) {
    for (uint32_t i = 0; i < count; ++i) {
      if (current[i].size() != IslandPopulation(spec, i)) {
        return absl::FailedPreconditionError(absl::StrCat(
            "run ", run.id, " island ", i, " holds ", current[i].size(),
            " of the genomes of generation ", h, "; it cannot be replayed"));
      }
    }
    std::vector<std::vector<GenomeRecord>> next(count);
    for (uint32_t i = 0; i < count; ++i) {
      std::vector<const GenomeRecord*> migrants;
      if (IsMigrationEpoch(spec, h + 1)) {
        for (uint32_t src : Sources(spec, i, h + 1)) {
          for (const GenomeRecord* m : ChooseEmigrants(
                   spec, current[src], i, spec.islands().migrants())) {
            migrants.push_back(m);
          }
        }
      }
      SKERRY_RETURN_IF_ERROR(strategies[i]->Tell(current[i], migrants));
      SKERRY_ASSIGN_OR_RETURN(made, strategies[i]->Ask());
      SKERRY_ASSIGN_OR_RETURN(next[i], store.GetGeneration(run.id, i, h + 1));
      SKERRY_RETURN_IF_ERROR(SameGeneration(run, i, h + 1, made, next[i]));
    }
    current = std::move(next);
  }
  std::vector<skerry::v1::StrategyState> out;
  for (const auto& s : strategies) out.push_back(s->Save());
  return out;
}

}  // namespace

absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run, uint32_t generation) {
  return Replay(store, run, generation, 0);
}

}  // namespace skerry::engine
