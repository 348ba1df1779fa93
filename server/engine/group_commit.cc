#include "server/engine/group_commit.h"

#include <cstdio>
#include <utility>

namespace skerry::engine {

void GroupCommit::Start() {
  thread_ = std::thread([this] { Loop(); });
}

absl::StatusOr<ReportOutcome> GroupCommit::Submit(
    int64_t worker_id, const std::vector<skerry::v1::TaskResult>& results) {
  Waiting w;
  w.job.worker_id = worker_id;
  w.job.results = &results;
  absl::MutexLock l(&mu_);
  if (stopping_) return absl::UnavailableError("coordinator is shutting down");
  waiting_.push_back(&w);
  mu_.Await(absl::Condition(&w.done));
  if (!w.job.status.ok()) return w.job.status;
  return std::move(w.job.outcome);
}

void GroupCommit::Shutdown() {
  absl::MutexLock once(&shutdown_mu_);
  {
    absl::MutexLock l(&mu_);
    stopping_ = true;
    // The batch in flight gets a deadline (real time: a hung disk does not
    // follow a test's clock); then its statement is interrupted and its
    // transaction rolled back. Its results were not acknowledged, so the
    // workers report them again to the next coordinator.
    auto exited = [this]()
                      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) { return exited_; };
    for (int attempt = 0; attempt <= kShutdownInterrupts && thread_.joinable();
         ++attempt) {
      if (mu_.AwaitWithTimeout(
              absl::Condition(&exited),
              attempt == 0 ? shutdown_grace_ : absl::Seconds(1))) {
        break;
      }
      std::fprintf(stderr,
                   "skerry-coordinator: the commit in flight did not end in "
                   "time; interrupting it\n");
      if (callbacks_.interrupt) callbacks_.interrupt();
    }
  }
  if (thread_.joinable()) thread_.join();
}

void GroupCommit::Loop() {
  while (true) {
    std::vector<Waiting*> batch;
    bool stopping = false;
    {
      absl::MutexLock l(&mu_);
      auto ready = [this]() ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_) {
        return stopping_ || !waiting_.empty();
      };
      clock_->AwaitWithTimeout(&mu_, absl::Condition(&ready), tick_);
      batch.swap(waiting_);
      stopping = stopping_;
    }
    if (!batch.empty()) {
      std::vector<ReportJob*> jobs;
      jobs.reserve(batch.size());
      for (Waiting* w : batch) jobs.push_back(&w->job);
      bool answered = false;
      auto answer = [this, &batch, &answered] {
        absl::MutexLock l(&mu_);
        for (Waiting* w : batch) w->done = true;
        answered = true;
      };
      callbacks_.apply(jobs, answer);
      if (!answered) answer();  // never leave a caller blocked
    }
    if (!stopping) callbacks_.idle();
    if (stopping) {
      absl::MutexLock l(&mu_);
      for (Waiting* w : waiting_) {
        w->job.status = absl::UnavailableError("coordinator is shutting down");
        w->done = true;
      }
      waiting_.clear();
      exited_ = true;
      return;
    }
  }
}

}  // namespace skerry::engine
