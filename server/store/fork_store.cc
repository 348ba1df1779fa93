// RunStore::CreateFork (run_store.h): a new run made from another's populations
// at a generation, in one transaction.
//
// What a fork holds of its parent (docs/user-guide.md, "Forking a run"):
// - the run row names the parent (parent_run, parent_generation);
// - each island starts at that generation, with copies of the parent's genomes
//   of it whose parent links still name the parent's genomes of the generation
//   before: every link goes back exactly one generation, so lineage walks
//   across the fork without knowing about it, and the digest of the fork's
//   generations equals the parent's over the same generations;
// - the parent's statistics of the generations before, so that the history,
//   the evaluation budget and the stop rules see what the parent saw;
// - each island's strategy state as the parent had it when it produced that
//   generation (rebuilt by server/engine/strategy_replay.h).
// The new rows get their checksums from the triggers of schema version 6.
#include <algorithm>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/genome_store.h"
#include "server/store/run_store.h"

namespace skerry::store {

absl::Status RunStore::CreateFork(
    RunRecord* run, std::vector<StatsRecord>* stats,
    std::vector<GenomeRecord>* genomes,
    const std::vector<std::string>& strategy_states) {
  Database::Writer w = db_->Write();
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(w.conn()));
  {
    // The parent may have been deleted since the engine read it.
    SKERRY_ASSIGN_OR_RETURN(auto q,
                            w->Prepare("SELECT 1 FROM runs WHERE id = ?1"));
    q.BindInt(1, run->parent_run);
    SKERRY_ASSIGN_OR_RETURN(bool found, q.Step());
    if (!found) {
      return absl::FailedPreconditionError(
          absl::StrCat("run ", run->parent_run, " is gone; nothing to fork"));
    }
  }
  int64_t evaluations = 0;
  for (const GenomeRecord& g : *genomes) {
    // The rule of `--check`: the counter counts stored evaluations.
    if (g.attempts > 0 && g.state != skerry::v1::PENDING) ++evaluations;
  }
  SKERRY_RETURN_IF_ERROR(InsertRunRow(w, run, run->parent_run,
                                      run->parent_generation, evaluations));
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto isl, w->Prepare("INSERT INTO islands (run_id, idx, generation, "
                             "done) VALUES (?, ?, ?, 0)"));
    const uint32_t count = std::max<uint32_t>(1, run->spec.islands().count());
    for (uint32_t i = 0; i < count; ++i) {
      isl.BindInt(1, run->id);
      isl.BindInt(2, i);
      isl.BindInt(3, run->parent_generation);
      SKERRY_RETURN_IF_ERROR(isl.Run());
    }
    SKERRY_RETURN_IF_ERROR(InsertStrategyStates(
        w, run->id, count, run->parent_generation, &strategy_states));
  }
  for (StatsRecord& s : *stats) {
    s.run_id = run->id;
    SKERRY_RETURN_IF_ERROR(InsertStats(w, s));
  }
  for (GenomeRecord& g : *genomes) g.run_id = run->id;
  SKERRY_RETURN_IF_ERROR(GenomeStore::Insert(w, genomes));
  return txn.Commit();
}

}  // namespace skerry::store
