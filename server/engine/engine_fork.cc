// Engine::Fork (engine.h): a new run from another's populations at a
// generation. The parent's rows are read through the store's checked reads
// (checksums, whole generations), copied, stored in one transaction
// (RunStore::CreateFork) with each island's strategy state at that generation
// (strategy_replay.h), and the new run is then loaded exactly as a restart
// loads a run, so that a fork and a restarted run take one path.
#include <algorithm>

#include "absl/strings/str_cat.h"
#include "common/spec.h"
#include "common/status_macros.h"
#include "server/engine/engine.h"
#include "server/engine/fork_spec.h"
#include "server/engine/strategy_replay.h"

namespace skerry::engine {

absl::StatusOr<store::RunRecord> Engine::Fork(
    int64_t parent_id, uint32_t generation, skerry::v1::RunSpec spec,
    std::string spec_text, std::string owner, uint32_t priority,
    std::string request_id) {
  SKERRY_ASSIGN_OR_RETURN(store::RunRecord parent,
                          store_->runs().GetRun(parent_id));
  if (parent.parent_run != 0 && generation == parent.parent_generation) {
    // Its genomes there are copies whose links lead into its own parent:
    // forking that run instead keeps every fork's links one run deep.
    return absl::FailedPreconditionError(
        absl::StrCat("run ", parent_id, " starts at generation ", generation,
                     " as a fork of run ", parent.parent_run, "; fork run ",
                     parent.parent_run, " at generation ", generation,
                     " instead, or run ", parent_id, " at a later generation"));
  }
  if (priority == 0) {
    priority = static_cast<uint32_t>(std::max<int32_t>(parent.priority, 1));
  }
  SKERRY_RETURN_IF_ERROR(CheckPriority(priority));
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::IslandRecord> islands,
                          store_->runs().GetIslands(parent_id));
  for (const store::IslandRecord& ir : islands) {
    if (ir.generation < generation) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", parent_id, " island ", ir.index,
                       " is at generation ", ir.generation,
                       "; a fork starts at a generation every island has "
                       "reached"));
    }
  }
  SKERRY_RETURN_IF_ERROR(CheckForkChanges(parent.spec, spec, generation));
  const bool keep_scores = ForkKeepsScores(parent.spec, spec);
  std::vector<store::GenomeRecord> genomes;
  for (const store::IslandRecord& ir : islands) {
    SKERRY_ASSIGN_OR_RETURN(
        std::vector<store::GenomeRecord> gen,
        store_->genomes().GetGeneration(parent_id, ir.index, generation));
    const uint32_t pop = IslandPopulation(parent.spec, ir.index);
    if (gen.size() != pop) {
      // A run ended by its target score keeps no generation past it.
      return absl::FailedPreconditionError(
          absl::StrCat("run ", parent_id, " island ", ir.index, " holds ",
                       gen.size(), " of the ", pop, " genomes of generation ",
                       generation, "; fork at a generation it holds whole"));
    }
    for (store::GenomeRecord& g : gen) {
      g.id = 0;
      // The copies keep their genes whole (read rebuilt), not a natural ES
      // sample's recipe nor a GA genome's: the fork's genes then need
      // nothing of the parent's rows, so a copy of the fork alone (a one-run
      // backup) holds them.
      g.recipe.reset();
      g.child_recipe.reset();
      g.keyframe = false;
      if (!keep_scores) {
        g.state = skerry::v1::PENDING;
        g.score = 0.0;
        g.attempts = 0;
        g.error.clear();
        g.eval_seconds = 0.0;
      }
      genomes.push_back(std::move(g));
    }
  }
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::StatsRecord> all_stats,
                          store_->runs().GetStats(parent_id, std::nullopt));
  std::vector<store::StatsRecord> stats;
  for (const store::StatsRecord& s : all_stats) {
    if (s.generation < generation) stats.push_back(s);
  }

  // Each island goes on from the parent's strategy state at `generation`.
  SKERRY_ASSIGN_OR_RETURN(std::vector<skerry::v1::StrategyState> replayed,
                          ReplayStrategyStates(*store_, parent, generation));
  std::vector<std::string> states;
  for (const skerry::v1::StrategyState& s : replayed) {
    states.push_back(s.SerializeAsString());
  }

  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  store::RunRecord rec;
  rec.name = spec.name();
  rec.owner = std::move(owner);
  rec.request_id = std::move(request_id);
  rec.priority = static_cast<int32_t>(priority);
  rec.spec = std::move(spec);
  rec.spec_text = std::move(spec_text);
  rec.state = skerry::v1::RUNNING;
  rec.created_ms = rec.updated_ms = rec.started_ms = clock_->WallMillis();
  rec.parent_run = parent_id;
  rec.parent_generation = generation;
  if (absl::Status s =
          store_->runs().CreateFork(&rec, &stats, &genomes, states);
      !s.ok()) {
    NoteWriteFailure(s);
    return s;
  }
  absl::Status loaded = LoadRun(rec);
  if (absl::IsDataLoss(loaded)) {
    MarkDamaged(rec.id, loaded, &rec);
  } else if (!loaded.ok()) {
    return loaded;
  }
  NotifyChange();
  return rec;
}

}  // namespace skerry::engine
