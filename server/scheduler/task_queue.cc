#include "server/scheduler/task_queue.h"

#include <algorithm>

#include "absl/strings/str_cat.h"

namespace skerry::scheduler {

TaskQueue::TaskQueue(Clock* clock, absl::Duration lease)
    : clock_(clock), lease_(lease) {}

void TaskQueue::Enqueue(Entry& e, bool front) {
  e.state = State::kQueued;
  e.holder = 0;
  RunQueue& rq = runs_[e.info.run_id];
  if (front) {
    rq.ids.push_front(e.info.task_id());
  } else {
    rq.ids.push_back(e.info.task_id());
  }
  ++rq.queued;
}

void TaskQueue::DropLease(Entry& e) {
  if (e.state == State::kLeased) {
    deadlines_.erase({e.deadline, e.info.task_id()});
  }
}

void TaskQueue::Add(std::vector<TaskInfo> tasks) {
  absl::MutexLock l(&mu_);
  for (TaskInfo& t : tasks) {
    const int64_t id = t.task_id();
    auto [it, inserted] = tasks_.try_emplace(id);
    if (!inserted) continue;
    it->second.info = std::move(t);
    Enqueue(it->second, /*front=*/false);
  }
}

void TaskQueue::RemoveRun(int64_t run_id) {
  absl::MutexLock l(&mu_);
  std::deque<int64_t> kept;  // the run's queued validations, in order
  size_t kept_queued = 0;
  for (auto it = tasks_.begin(); it != tasks_.end();) {
    const TaskInfo& info = it->second.info;
    if (info.run_id == run_id && info.kind == skerry::v1::TASK_EVALUATE) {
      DropLease(it->second);
      it = tasks_.erase(it);
    } else {
      ++it;
    }
  }
  auto rq = runs_.find(run_id);
  if (rq == runs_.end()) return;
  for (int64_t id : rq->second.ids) {
    auto t = tasks_.find(id);
    if (t != tasks_.end() && t->second.state == State::kQueued) {
      kept.push_back(id);
      ++kept_queued;
    }
  }
  if (kept.empty()) {
    runs_.erase(rq);
    return;
  }
  rq->second.ids = std::move(kept);
  rq->second.queued = kept_queued;
  rq->second.paused = false;  // the run is over: nothing holds these back
}

void TaskQueue::Remove(absl::Span<const int64_t> task_ids) {
  absl::MutexLock l(&mu_);
  for (int64_t id : task_ids) {
    auto it = tasks_.find(id);
    if (it == tasks_.end()) continue;
    if (it->second.state == State::kQueued) {
      --runs_[it->second.info.run_id].queued;
    }
    DropLease(it->second);
    tasks_.erase(it);
  }
}

void TaskQueue::SetPaused(int64_t run_id, bool paused) {
  absl::MutexLock l(&mu_);
  runs_[run_id].paused = paused;
}

void TaskQueue::ExpireLeases(absl::Time now) {
  // Expired tasks go to the front, oldest deadline first, so they are retried
  // before newer work.
  std::vector<int64_t> expired;
  while (!deadlines_.empty() && deadlines_.begin()->first <= now) {
    expired.push_back(deadlines_.begin()->second);
    deadlines_.erase(deadlines_.begin());
  }
  for (auto it = expired.rbegin(); it != expired.rend(); ++it) {
    auto t = tasks_.find(*it);
    if (t != tasks_.end() && t->second.state == State::kLeased) {
      Enqueue(t->second, /*front=*/true);
    }
  }
}

void TaskQueue::SetHeld(bool held) {
  absl::MutexLock l(&mu_);
  held_ = held;
}

bool TaskQueue::HasReadyLocked() const {
  if (held_) return false;
  for (const auto& [run, rq] : runs_) {
    if (!rq.paused && rq.queued > 0) return true;
  }
  return false;
}

std::vector<skerry::v1::Task> TaskQueue::Lease(int64_t worker,
                                               uint32_t max_tasks,
                                               absl::Duration wait) {
  std::vector<skerry::v1::Task> out;
  if (max_tasks == 0) return out;
  absl::MutexLock l(&mu_);
  const absl::Time give_up = absl::Now() + wait;
  while (true) {
    ExpireLeases(clock_->Now());
    if (shutdown_ || HasReadyLocked()) break;
    // Wake at least every 100 ms to notice expired leases.
    const absl::Time wake = std::min(give_up, absl::Now() + absl::Milliseconds(100));
    if (absl::Now() >= give_up) return out;
    mu_.AwaitWithDeadline(
        absl::Condition(
            +[](TaskQueue* q) ABSL_NO_THREAD_SAFETY_ANALYSIS {
              return q->shutdown_ || q->HasReadyLocked();
            },
            this),
        wake);
  }
  if (shutdown_) return out;
  const absl::Time deadline = clock_->Now() + lease_;
  // Round-robin: take one task from each ready run in turn, starting after the
  // run served last.
  while (out.size() < max_tasks) {
    bool took = false;
    auto start = runs_.upper_bound(next_run_);
    std::vector<std::map<int64_t, RunQueue>::iterator> order;
    for (auto it = start; it != runs_.end(); ++it) order.push_back(it);
    for (auto it = runs_.begin(); it != start; ++it) order.push_back(it);
    for (auto rit : order) {
      RunQueue& rq = rit->second;
      if (rq.paused || rq.queued == 0) continue;
      while (!rq.ids.empty()) {
        const int64_t id = rq.ids.front();
        rq.ids.pop_front();
        auto t = tasks_.find(id);
        if (t == tasks_.end() || t->second.state != State::kQueued) continue;
        Entry& e = t->second;
        --rq.queued;
        e.state = State::kLeased;
        e.holder = worker;
        e.deadline = deadline;
        ++e.info.attempts;
        deadlines_.insert({deadline, id});
        skerry::v1::Task task;
        task.set_task_id(static_cast<uint64_t>(id));
        task.set_attempt(e.info.attempts);
        task.set_run_id(static_cast<uint64_t>(e.info.run_id));
        *task.mutable_genes() = {e.info.genes.begin(), e.info.genes.end()};
        *task.mutable_evaluator() = *e.info.evaluator;
        task.set_eval_seed(e.info.eval_seed);
        task.set_kind(e.info.kind);
        out.push_back(std::move(task));
        took = true;
        next_run_ = rit->first;
        break;
      }
      if (out.size() >= max_tasks) break;
    }
    if (!took) break;
  }
  return out;
}

void TaskQueue::Renew(int64_t worker, absl::Span<const uint64_t> task_ids) {
  absl::MutexLock l(&mu_);
  const absl::Time deadline = clock_->Now() + lease_;
  for (uint64_t id : task_ids) {
    auto t = tasks_.find(static_cast<int64_t>(id));
    if (t == tasks_.end()) continue;
    Entry& e = t->second;
    if (e.state != State::kLeased || e.holder != worker) continue;
    deadlines_.erase({e.deadline, e.info.task_id()});
    e.deadline = deadline;
    deadlines_.insert({deadline, e.info.task_id()});
  }
}

std::optional<TaskInfo> TaskQueue::Claim(int64_t worker, uint64_t task_id,
                                         uint32_t attempt, bool failed_attempt,
                                         absl::Status* why) {
  auto refuse = [&](absl::Status s) -> std::optional<TaskInfo> {
    if (why != nullptr) *why = std::move(s);
    return std::nullopt;
  };
  absl::MutexLock l(&mu_);
  auto t = tasks_.find(static_cast<int64_t>(task_id));
  if (t == tasks_.end()) {
    return refuse(absl::NotFoundError(absl::StrCat(
        "task ", task_id,
        " is unknown or its result is already stored (duplicate)")));
  }
  Entry& e = t->second;
  if (e.state == State::kClaimed) {
    return refuse(absl::AbortedError(absl::StrCat(
        "another result for task ", task_id, " is being committed")));
  }
  if (failed_attempt && (e.state != State::kLeased || e.holder != worker ||
                         e.info.attempts != attempt)) {
    return refuse(absl::FailedPreconditionError(absl::StrCat(
        "failed attempt ", attempt, " of task ", task_id,
        " is not from its current lease (attempt ", e.info.attempts,
        "); not counted")));
  }
  if (e.state == State::kQueued) --runs_[e.info.run_id].queued;
  DropLease(e);
  e.state = State::kClaimed;
  return e.info;
}

void TaskQueue::Complete(absl::Span<const int64_t> task_ids) {
  absl::MutexLock l(&mu_);
  for (int64_t id : task_ids) {
    auto t = tasks_.find(id);
    if (t != tasks_.end() && t->second.state == State::kClaimed) tasks_.erase(t);
  }
}

void TaskQueue::Unclaim(absl::Span<const int64_t> task_ids) {
  absl::MutexLock l(&mu_);
  for (int64_t id : task_ids) {
    auto t = tasks_.find(id);
    if (t != tasks_.end() && t->second.state == State::kClaimed) {
      Enqueue(t->second, /*front=*/true);
    }
  }
}

void TaskQueue::Shutdown() {
  absl::MutexLock l(&mu_);
  shutdown_ = true;
}

TaskQueue::Counts TaskQueue::counts() const {
  absl::MutexLock l(&mu_);
  Counts c;
  for (const auto& [id, e] : tasks_) {
    switch (e.state) {
      case State::kQueued:
        ++c.queued;
        break;
      case State::kLeased:
        ++c.leased;
        break;
      case State::kClaimed:
        ++c.claimed;
        break;
    }
  }
  return c;
}

}  // namespace skerry::scheduler
