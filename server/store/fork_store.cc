// Store::CreateFork (store.h): a new run made from another's populations at a
// generation, in one transaction.
//
// What a fork holds of its parent (docs/user-guide.md, "Forking a run"):
// - the run row names the parent (parent_run, parent_generation);
// - each island starts at that generation, with copies of the parent's genomes
//   of it whose parent links still name the parent's genomes of the generation
//   before: every link goes back exactly one generation, so lineage walks
//   across the fork without knowing about it, and the digest of the fork's
//   generations equals the parent's over the same generations;
// - the parent's statistics of the generations before, so that the history,
//   the evaluation budget and the stop rules see what the parent saw.
// The new rows get their checksums from the triggers of schema version 6.
#include <algorithm>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/store/store.h"

namespace skerry::store {

absl::Status Store::CreateFork(RunRecord* run, std::vector<StatsRecord>* stats,
                               std::vector<GenomeRecord>* genomes) {
  absl::MutexLock l(&mu_);
  SKERRY_ASSIGN_OR_RETURN(auto txn, Transaction::Begin(conn_.get()));
  {
    // The parent may have been deleted since the engine read it.
    SKERRY_ASSIGN_OR_RETURN(auto q,
                            conn_->Prepare("SELECT 1 FROM runs WHERE id = ?1"));
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
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto ins,
        conn_->Prepare(
            "INSERT INTO runs (name, owner, spec, spec_text, seed, state, "
            "priority, message, created_ms, updated_ms, started_ms, "
            "request_id, parent_run, parent_generation, evaluations) VALUES "
            "(?,?,?,?,?,?,?,?,?,?,?,?,?,?,?)"));
    ins.BindText(1, run->name);
    ins.BindText(2, run->owner);
    ins.BindBlob(3, run->spec.SerializeAsString());
    ins.BindText(4, run->spec_text);
    ins.BindInt(5, static_cast<int64_t>(run->spec.seed()));
    ins.BindInt(6, run->state);
    ins.BindInt(7, run->priority);
    ins.BindText(8, run->message);
    ins.BindInt(9, run->created_ms);
    ins.BindInt(10, run->updated_ms);
    ins.BindInt(11, run->started_ms);
    if (run->request_id.empty()) {
      ins.BindNull(12);
    } else {
      ins.BindText(12, run->request_id);
    }
    ins.BindInt(13, run->parent_run);
    ins.BindInt(14, run->parent_generation);
    ins.BindInt(15, evaluations);
    SKERRY_RETURN_IF_ERROR(ins.Run());
    run->id = conn_->LastInsertId();
    run->evaluations = evaluations;
  }
  {
    SKERRY_ASSIGN_OR_RETURN(
        auto isl,
        conn_->Prepare("INSERT INTO islands (run_id, idx, generation, "
                       "done) VALUES (?, ?, ?, 0)"));
    const uint32_t count = std::max<uint32_t>(1, run->spec.islands().count());
    for (uint32_t i = 0; i < count; ++i) {
      isl.BindInt(1, run->id);
      isl.BindInt(2, i);
      isl.BindInt(3, run->parent_generation);
      SKERRY_RETURN_IF_ERROR(isl.Run());
    }
  }
  for (StatsRecord& s : *stats) {
    s.run_id = run->id;
    SKERRY_RETURN_IF_ERROR(InsertStats(s));
  }
  for (GenomeRecord& g : *genomes) g.run_id = run->id;
  SKERRY_RETURN_IF_ERROR(InsertGenomes(genomes));
  return txn.Commit();
}

}  // namespace skerry::store
