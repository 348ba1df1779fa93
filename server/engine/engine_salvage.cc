// Engine::SalvageBatch (engine.h, "Storage trouble"): a batch of results whose
// commit failed for a reason that is neither the storage's nor damage. Such a
// failure (a bug, or a value the store will not take) would repeat every time
// the batch is sent again, and holding the fleet would not fix it; so each
// result is committed alone, and the one that fails alone is stored as a
// failed attempt naming the error. Only a result that cannot be stored even
// so is refused; it is queued again, and nothing else waits for it.
#include <cstdio>
#include <string>
#include <vector>

#include "absl/strings/str_cat.h"
#include "server/engine/engine.h"

namespace skerry::engine {

namespace {

// The error stored for a result the coordinator could not store as it came.
std::string NotStorable(const absl::Status& why) {
  std::string text =
      absl::StrCat("the coordinator could not store this result (",
                   why.ToString(), "); recorded as a failed attempt");
  constexpr size_t kMaxBytes = 4096;  // a stored text: keep it bounded
  if (text.size() > kMaxBytes) text.resize(kMaxBytes);
  return text;
}

}  // namespace

void Engine::SalvageBatch(std::vector<AppliedResult>* applied,
                          std::vector<store::ValidationUpdate>* validated,
                          std::vector<ValidatedResult>* validated_from,
                          std::vector<ReportOutcome>* outcomes) {
  // A result not stored even as a failure: refused, and its task queued again.
  auto refuse = [&](size_t job, uint64_t task_id, int64_t queue_id,
                    const absl::Status& s) ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
    std::fprintf(
        stderr, "skerry-coordinator: result for task %llu not stored: %s\n",
        static_cast<unsigned long long>(task_id), s.ToString().c_str());
    NoteWriteFailure(s);
    queue_->Unclaim({queue_id});
    ReportOutcome& o = (*outcomes)[job];
    --o.accepted;
    ++o.ignored;
    skerry::v1::RejectedResult* x = &o.rejected.emplace_back();
    x->set_task_id(task_id);
    x->set_code(static_cast<uint32_t>(s.code()));
    x->set_message(absl::StrCat("not stored: ", s.message()));
  };

  std::vector<AppliedResult> stored;
  for (AppliedResult& a : *applied) {
    store::ResultUpdate& u = a.update;
    absl::Status s = store_->genomes().CommitResults({u}, {});
    if (!s.ok() && !IsStorageTrouble(s) && !absl::IsDataLoss(s)) {
      u.error = NotStorable(s);
      u.score = 0.0;
      u.metrics.clear();
      u.eval_seconds = 0.0;
      u.state = u.attempts >= a.max_attempts ? skerry::v1::FAILED
                                             : skerry::v1::PENDING;
      s = store_->genomes().CommitResults({u}, {});
    }
    if (s.ok()) {
      stored.push_back(std::move(a));
      continue;
    }
    if (absl::IsDataLoss(s)) MarkDamaged(u.run_id, s);
    refuse(a.job, a.result->task_id(), u.genome_id, s);
  }
  // A run found damaged on the way is gone from the cache, with its tasks.
  applied->clear();
  for (AppliedResult& a : stored) {
    if (runs_.count(a.update.run_id) != 0) applied->push_back(std::move(a));
  }

  std::vector<store::ValidationUpdate> kept;
  std::vector<ValidatedResult> kept_from;
  for (size_t i = 0; i < validated->size(); ++i) {
    const ValidatedResult& from = (*validated_from)[i];
    store::ValidationUpdate& u = (*validated)[i];
    absl::Status s = store_->genomes().CommitResults({}, {u});
    if (!s.ok() && !IsStorageTrouble(s) && !absl::IsDataLoss(s)) {
      skerry::v1::TaskResult failed = *from.result;
      failed.set_error(NotStorable(s));
      u = ValidationOutcome(from.info, failed, /*failed=*/true);
      s = store_->genomes().CommitResults({}, {u});
    }
    if (s.ok()) {
      kept.push_back(u);
      kept_from.push_back(from);
      continue;
    }
    refuse(from.job, from.result->task_id(), from.info.task_id(), s);
  }
  *validated = std::move(kept);
  *validated_from = std::move(kept_from);
}

}  // namespace skerry::engine
