// Engine::Delete (engine.h): an ended or damaged run goes, with its queued
// validations. An active run is refused: stopping it first is a separate,
// audited decision.
#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/engine/engine.h"

namespace skerry::engine {

absl::StatusOr<store::Store::Deleted> Engine::Delete(int64_t run_id) {
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  if (auto it = runs_.find(run_id); it != runs_.end()) {
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", run_id, " is ",
        skerry::v1::RunState_Name(it->second->record.state),
        "; stop it first (`skerry stop ", run_id, "`), then delete it"));
  }
  absl::StatusOr<store::Store::Deleted> deleted = store_->DeleteRun(run_id);
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

}  // namespace skerry::engine
