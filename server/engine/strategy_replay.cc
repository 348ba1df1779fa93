// ReplayStrategyStates (strategy_replay.h).
#include "server/engine/strategy_replay.h"

#include <algorithm>
#include <memory>
#include <utility>

#include "absl/strings/str_cat.h"
#include "absl/types/span.h"
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
    // A link into the generation itself names a slot (records.h).
    const int64_t made_a =
        a.parent_a_slot >= 0 &&
                static_cast<size_t>(a.parent_a_slot) < stored.size()
            ? stored[static_cast<size_t>(a.parent_a_slot)].id
            : a.parent_a;
    if (made_a != b.parent_a || a.parent_b != b.parent_b) {
      return differs(b.slot, "its parent links differ");
    }
    // A sample made as its recipe alone is compared as the genes it builds.
    absl::StatusOr<std::vector<double>> made_genes = SampleGenes(made, a);
    if (!made_genes.ok() || *made_genes != b.genes) {
      return differs(b.slot, "its genes differ");
    }
  }
  return absl::OkStatus();
}

absl::StatusOr<std::vector<skerry::v1::StrategyState>> Replay(
    store::Store& store, const store::RunRecord& run,
    absl::Span<const uint32_t> targets, int depth) {
  const skerry::v1::RunSpec& spec = run.spec;
  const uint32_t count = std::max<uint32_t>(1, spec.islands().count());
  if (targets.size() != count) {
    return absl::InvalidArgumentError(
        absl::StrCat("run ", run.id, " has ", count, " islands; ",
                     targets.size(), " generations given to replay to"));
  }
  const uint32_t lowest = *std::min_element(targets.begin(), targets.end());
  const uint32_t last = *std::max_element(targets.begin(), targets.end());
  std::vector<std::unique_ptr<Strategy>> strategies;
  for (uint32_t i = 0; i < count; ++i) {
    SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<Strategy> s, MakeStrategy(spec, i));
    strategies.push_back(std::move(s));
  }
  if (strategies.front()->StateIsPopulation()) {
    std::vector<skerry::v1::StrategyState> out;
    for (uint32_t i = 0; i < count; ++i) {
      skerry::v1::StrategyState state = strategies[i]->Save();
      state.set_generation(targets[i]);
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
    if (lowest < run.parent_generation) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", run.id, " starts at generation ",
                       run.parent_generation, " as a fork of run ",
                       run.parent_run, "; it holds no generation ", lowest));
    }
    if (depth >= kMaxForkDepth) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", run.id, " is a fork more than ", kMaxForkDepth,
                       " forks deep; fork an earlier run of the chain"));
    }
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord parent,
                            store.runs().GetRun(run.parent_run));
    SKERRY_ASSIGN_OR_RETURN(
        std::vector<skerry::v1::StrategyState> start,
        Replay(store, parent,
               std::vector<uint32_t>(
                   std::max<uint32_t>(1, parent.spec.islands().count()),
                   run.parent_generation),
               depth + 1));
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
                              store.genomes().GetGeneration(run.id, i, 0));
      SKERRY_RETURN_IF_ERROR(SameGeneration(run, i, 0, made, stored));
    }
  }

  // Generation by generation, all islands together: the migrants of an epoch
  // come from the sources' stored generation h, and each island's stored
  // generation h + 1, once compared, is what it is told next. An island
  // stops at its own target; its generation there stays loaded while the
  // others go on from the same generation (it may be a source of migrants).
  std::vector<std::vector<GenomeRecord>> current(count);
  for (uint32_t i = 0; i < count && first < last; ++i) {
    if (targets[i] < first) continue;
    SKERRY_ASSIGN_OR_RETURN(current[i],
                            store.genomes().GetGeneration(run.id, i, first));
  }
  auto whole = [&](uint32_t i, uint32_t h) -> absl::Status {
    if (current[i].size() == IslandPopulation(spec, i)) return absl::OkStatus();
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run.id, " island ", i, " holds ", current[i].size(),
        " of the genomes of generation ", h, "; it cannot be replayed"));
  };
  for (uint32_t h = first; h < last; ++h) {
    std::vector<std::vector<GenomeRecord>> next(count);
    for (uint32_t i = 0; i < count; ++i) {
      if (h >= targets[i]) continue;
      SKERRY_RETURN_IF_ERROR(whole(i, h));
      std::vector<const GenomeRecord*> migrants;
      if (IsMigrationEpoch(spec, h + 1)) {
        for (uint32_t src : Sources(spec, i, h + 1)) {
          SKERRY_RETURN_IF_ERROR(whole(src, h));
          for (const GenomeRecord* m : ChooseEmigrants(
                   spec, current[src], i, spec.islands().migrants())) {
            migrants.push_back(m);
          }
        }
      }
      SKERRY_ASSIGN_OR_RETURN(made,
                              strategies[i]->TellAndAsk(current[i], migrants));
      SKERRY_ASSIGN_OR_RETURN(next[i],
                              store.genomes().GetGeneration(run.id, i, h + 1));
      SKERRY_RETURN_IF_ERROR(SameGeneration(run, i, h + 1, made, next[i]));
    }
    for (uint32_t i = 0; i < count; ++i) {
      if (h < targets[i]) {
        current[i] = std::move(next[i]);
      } else {
        current[i].clear();  // the island's replay ended at h or before
      }
    }
  }
  std::vector<skerry::v1::StrategyState> out;
  for (const auto& s : strategies) out.push_back(s->Save());
  return out;
}

}  // namespace

absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run, uint32_t generation) {
  const uint32_t count = std::max<uint32_t>(1, run.spec.islands().count());
  return Replay(store, run, std::vector<uint32_t>(count, generation), 0);
}

absl::StatusOr<std::vector<skerry::v1::StrategyState>> ReplayStrategyStates(
    store::Store& store, const store::RunRecord& run,
    absl::Span<const uint32_t> generations) {
  return Replay(store, run, generations, 0);
}

absl::StatusOr<std::vector<std::string>> StatesToGoOn(
    store::Store& store, const store::RunRecord& run) {
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::IslandRecord> islands,
                          store.runs().GetIslands(run.id));
  SKERRY_ASSIGN_OR_RETURN(auto stored, store.runs().GetStrategyStates(run.id));
  const uint32_t count = std::max<uint32_t>(1, run.spec.islands().count());
  if (islands.size() != count) {
    return absl::DataLossError(absl::StrCat("run ", run.id, " holds ",
                                            islands.size(), " of its ", count,
                                            " island rows"));
  }
  std::vector<uint32_t> targets(count);
  std::vector<std::string> out(count);
  bool replay = false;
  for (const store::IslandRecord& ir : islands) {
    if (ir.index >= count) {
      return absl::DataLossError(absl::StrCat("run ", run.id, " has island ",
                                              ir.index, " of ", count));
    }
    targets[ir.index] = ir.generation;
    auto it = stored.find(ir.index);
    skerry::v1::StrategyState state;
    // Empty: a GA state stored before states were kept (it keeps nothing).
    if (it != stored.end() && !it->second.empty() &&
        state.ParseFromString(it->second) &&
        state.generation() == ir.generation) {
      out[ir.index] = it->second;
    } else {
      replay = true;
    }
  }
  if (!replay) return out;
  SKERRY_ASSIGN_OR_RETURN(std::vector<skerry::v1::StrategyState> rebuilt,
                          ReplayStrategyStates(store, run, targets));
  for (uint32_t i = 0; i < count; ++i) {
    out[i] = rebuilt[i].SerializeAsString();
  }
  return out;
}

}  // namespace skerry::engine
