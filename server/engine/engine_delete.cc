// Engine::Delete (engine.h): an ended or damaged run goes, with its queued
// validations. An active run is refused: stopping it first is a separate,
// audited decision. Engine::Import: runs of an export file, the active ones
// loaded.
#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/engine/engine.h"

namespace skerry::engine {

absl::StatusOr<store::RunStore::Deleted> Engine::Delete(
    int64_t run_id, const std::string& expected_content) {
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  if (auto it = runs_.find(run_id); it != runs_.end()) {
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run_id, " is ",
        skerry::v1::RunState_Name(it->second->record.state),
        "; stop it first (`skerry stop ", run_id, "`), then delete it"));
  }
  absl::StatusOr<store::RunStore::Deleted> deleted =
      store_->runs().DeleteRun(run_id, expected_content);
  if (!deleted.ok()) {
    NoteWriteFailure(deleted.status());
    return deleted;
  }
  // Its validations may still be queued (they outlive the search).
  std::vector<int64_t> tasks;
  for (auto it = validations_.begin(); it != validations_.end();) {
    if (it->second.run_id == run_id) {
      tasks.push_back(scheduler::kValidationTaskBase + it->first);
      it = validations_.erase(it);
    } else {
      ++it;
    }
  }
  queue_->Remove(tasks);
  queue_->RemoveRun(run_id);
  damaged_.erase(run_id);
  NotifyChange();
  return deleted;
}

absl::StatusOr<store::RunStore::Imported> Engine::Import(
    const std::string& file) {
  // Outside the engine's lock: a large file takes a while, and the store
  // serialises its writes itself.
  absl::StatusOr<store::RunStore::Imported> imported =
      store_->runs().ImportRuns(file);
  absl::MutexLock l(&mu_);
  AwaitCommit();  // LoadRun changes the cache and the queue
  if (!imported.ok()) {
    NoteWriteFailure(imported.status());
    return imported;
  }
  // An active run of the file goes on here, as a restart would load it.
  for (const auto& [from, to] : imported->runs) {
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord r, store_->runs().GetRun(to));
    if (!r.damage.ok()) {
      MarkDamaged(r.id, r.damage, &r);
      continue;
    }
    if (r.state != skerry::v1::QUEUED && r.state != skerry::v1::RUNNING &&
        r.state != skerry::v1::PAUSED) {
      continue;  // ended: nothing to drive
    }
    absl::Status s = LoadRun(r);
    if (absl::IsDataLoss(s)) {
      MarkDamaged(r.id, s, &r);
    } else if (!s.ok()) {
      return s;
    }
  }
  NotifyChange();
  return imported;
}

}  // namespace skerry::engine
