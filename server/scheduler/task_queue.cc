#include "server/scheduler/task_queue.h"

#include <algorithm>

#include "absl/strings/str_cat.h"

namespace skerry::scheduler {

TaskQueue::TaskQueue(Clock* clock, absl::Duration lease)
    : clock_(clock), lease_(lease) {}

void TaskQueue::CatchUp(RunQueue& rq) {
  rq.vtime = std::max(rq.vtime, virtual_now_);
}

void TaskQueue::Enqueue(Entry& e, bool front) {
  e.state = State::kQueued;
  e.holder = 0;
  RunQueue& rq = runs_[e.info.run_id];
  if (rq.queued == 0 && !rq.paused) CatchUp(rq);
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
    Unhold(e.holder);
  }
}

void TaskQueue::Unhold(int64_t worker) {
  auto it = leased_by_.find(worker);
  if (it != leased_by_.end() && --it->second == 0) leased_by_.erase(it);
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
  RunQueue& rq = runs_[run_id];
  if (rq.paused && !paused && rq.queued > 0) CatchUp(rq);
  rq.paused = paused;
}

void TaskQueue::SetWeight(int64_t run_id, uint32_t weight) {
  absl::MutexLock l(&mu_);
  runs_[run_id].weight = std::clamp(weight, kMinWeight, kMaxWeight);
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
      Unhold(t->second.holder);
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
                                               absl::Duration wait,
                                               size_t max_bytes) {
  return Lease(worker, max_tasks, wait, max_bytes, nullptr);
}

namespace {

// Whether the lease must carry centre `id`: not held, not yet added.
bool CentreWanted(const TaskQueue::Centres& c, int64_t id) {
  const uint64_t u = static_cast<uint64_t>(id);
  if (std::find(c.held.begin(), c.held.end(), u) != c.held.end()) return false;
  for (const auto& [have, genes] : c.wanted) {
    if (have == id) return false;
  }
  return true;
}

}  // namespace

std::vector<skerry::v1::Task> TaskQueue::Lease(int64_t worker,
                                               uint32_t max_tasks,
                                               absl::Duration wait,
                                               size_t max_bytes,
                                               Centres* centres) {
  std::vector<skerry::v1::Task> out;
  if (max_tasks == 0) return out;
  absl::MutexLock l(&mu_);
  // A worker polling an empty queue takes part in the split of what comes.
  askers_[worker] = Asker{clock_->Now(), max_tasks};
  const absl::Time give_up = absl::Now() + wait;
  while (true) {
    ExpireLeases(clock_->Now());
    if (shutdown_ || HasReadyLocked()) break;
    // Wake at least every 100 ms to notice expired leases.
    const absl::Time wake =
        std::min(give_up, absl::Now() + absl::Milliseconds(100));
    if (absl::Now() >= give_up) return out;
    mu_.AwaitWithDeadline(absl::Condition(
                              +[](TaskQueue* q) ABSL_NO_THREAD_SAFETY_ANALYSIS {
                                return q->shutdown_ || q->HasReadyLocked();
                              },
                              this),
                          wake);
  }
  // A worker that has left may still have a long poll waiting here (its
  // caller cancelled it): it must not take the tasks it handed back.
  if (shutdown_ || departed_.count(worker) > 0) return out;
  const absl::Time deadline = clock_->Now() + lease_;
  const uint32_t share = ShareOf(worker, max_tasks);
  size_t bytes = 0;
  while (out.size() < share) {
    auto next = NextRun();
    if (next == runs_.end()) break;
    // The answer must fit in one gRPC message: stop before the task that
    // would make it too big.
    const size_t size = FrontTaskBytes(next->second, centres);
    if (!out.empty() && size > max_bytes - std::min(bytes, max_bytes)) break;
    bytes += size;
    out.push_back(LeaseFrom(next->second, worker, deadline, centres));
  }
  return out;
}

uint32_t TaskQueue::ShareOf(int64_t worker, uint32_t max_tasks) {
  const absl::Time now = clock_->Now();
  askers_[worker] = Asker{now, max_tasks};
  uint64_t asked = 0;
  for (auto it = askers_.begin(); it != askers_.end();) {
    if (it->second.last + lease_ < now || departed_.count(it->first) > 0) {
      it = askers_.erase(it);
    } else {
      asked += it->second.asks;
      ++it;
    }
  }
  // The tasks to share: those ready now and those the asking workers hold.
  uint64_t total = 0;
  for (const auto& [id, rq] : runs_) {
    if (!rq.paused) total += rq.queued;
  }
  uint64_t mine = 0;
  for (const auto& [id, asker] : askers_) {
    auto held = leased_by_.find(id);
    if (held == leased_by_.end()) continue;
    total += held->second;
    if (id == worker) mine = held->second;
  }
  // asked >= max_tasks > 0 (this worker is among the askers); the product
  // stays far inside 64 bits (tasks and max_tasks are bounded).
  const uint64_t target = (total * max_tasks + asked - 1) / asked;
  const uint64_t share = target > mine ? target - mine : 0;
  return static_cast<uint32_t>(
      std::max<uint64_t>(1, std::min<uint64_t>(max_tasks, share)));
}

size_t TaskQueue::FrontTaskBytes(RunQueue& rq, const Centres* centres) {
  while (true) {
    auto t = tasks_.find(rq.ids.front());
    if (t != tasks_.end() && t->second.state == State::kQueued) {
      const TaskInfo& info = t->second.info;
      if (centres != nullptr && info.recipe.has_value()) {
        // The recipe's fields and framing, the centre when it must go too.
        const size_t centre =
            info.centre != nullptr && CentreWanted(*centres, info.centre_id)
                ? 8 * info.centre->size() + 16
                : 0;
        return 128 + centre +
               (info.evaluator ? info.evaluator->ByteSizeLong() : 0);
      }
      // Genes are packed doubles (or floats); 64 bytes cover the ids,
      // attempt, seed, kind and the framing of the task and its fields. A
      // sample held as its recipe alone goes as the genes it builds.
      const size_t genes = info.genes.empty() && info.recipe.has_value()
                               ? info.recipe->length
                               : info.genes.size();
      return (info.float32 ? 4 : 8) * genes +
             (info.evaluator ? info.evaluator->ByteSizeLong() : 0) + 64;
    }
    rq.ids.pop_front();
  }
}

std::map<int64_t, TaskQueue::RunQueue>::iterator TaskQueue::NextRun() {
  auto best = runs_.end();
  for (auto it = runs_.begin(); it != runs_.end(); ++it) {
    const RunQueue& rq = it->second;
    if (rq.paused || rq.queued == 0) continue;
    // Strictly smaller: on a tie the smaller run id (met first) wins.
    if (best == runs_.end() || rq.vtime < best->second.vtime) best = it;
  }
  return best;
}

skerry::v1::Task TaskQueue::LeaseFrom(RunQueue& rq, int64_t worker,
                                      absl::Time deadline, Centres* centres) {
  // rq.queued > 0, so a queued id is in rq.ids; stale ids are skipped.
  Entry* e = nullptr;
  while (e == nullptr) {
    const int64_t id = rq.ids.front();
    rq.ids.pop_front();
    auto t = tasks_.find(id);
    if (t != tasks_.end() && t->second.state == State::kQueued) e = &t->second;
  }
  virtual_now_ = rq.vtime;
  rq.vtime += kVirtualUnit / rq.weight;
  if (virtual_now_ > (uint64_t{1} << 62)) {
    // Centuries of hand-outs: shift every clock down, keeping their order
    // among ready runs (whose clocks are all >= virtual now).
    for (auto& [id, other] : runs_) {
      other.vtime -= std::min(other.vtime, virtual_now_);
    }
    virtual_now_ = 0;
  }
  --rq.queued;
  e->state = State::kLeased;
  e->holder = worker;
  ++leased_by_[worker];
  e->deadline = deadline;
  ++e->info.attempts;
  if (e->holders.size() >= kMaxHoldersKept)
    e->holders.erase(e->holders.begin());
  e->holders.emplace_back(e->info.attempts, worker);
  deadlines_.insert({deadline, e->info.task_id()});
  skerry::v1::Task task;
  task.set_task_id(static_cast<uint64_t>(e->info.task_id()));
  task.set_attempt(e->info.attempts);
  task.set_run_id(static_cast<uint64_t>(e->info.run_id));
  if (centres != nullptr && e->info.recipe.has_value() &&
      e->info.centre != nullptr) {
    const SampleRecipe& r = *e->info.recipe;
    skerry::v1::SampleTask* sample = task.mutable_sample();
    sample->set_centre_id(static_cast<uint64_t>(e->info.centre_id));
    sample->set_seed(r.seed);
    sample->set_island(r.island);
    sample->set_generation(r.generation);
    sample->set_pair(r.pair);
    sample->set_minus(r.minus);
    sample->set_float32(r.float32);
    sample->set_length(r.length);
    sample->set_sigma(r.sigma);
    sample->set_lower(r.lower);
    sample->set_upper(r.upper);
    if (CentreWanted(*centres, e->info.centre_id)) {
      centres->wanted.emplace_back(e->info.centre_id, e->info.centre);
    }
  } else {
    // A worker that takes no recipes gets the genes; a sample the engine
    // holds as its recipe alone (records.h) is built here, for this lease.
    std::vector<double> built;
    const std::vector<double>* genes = &e->info.genes;
    if (genes->empty() && e->info.recipe.has_value() &&
        e->info.centre != nullptr) {
      absl::StatusOr<std::vector<double>> made =
          BuildSample(*e->info.recipe, *e->info.centre);
      // It cannot fail: the engine sends a recipe this way only with a
      // centre of its length (Engine::QueueIsland), and a recipe's sigma
      // and bounds come from a validated spec or a checked store read.
      if (made.ok()) built = *std::move(made);
      genes = &built;
    }
    if (e->info.float32) {
      // Exact: the engine made every gene a float32 value (common/genes.h).
      task.mutable_genes32()->Reserve(static_cast<int>(genes->size()));
      for (double g : *genes) task.add_genes32(static_cast<float>(g));
    } else {
      *task.mutable_genes() = {genes->begin(), genes->end()};
    }
  }
  *task.mutable_evaluator() = *e->info.evaluator;
  task.set_eval_seed(e->info.eval_seed);
  task.set_kind(e->info.kind);
  return task;
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

size_t TaskQueue::HandBack(int64_t worker, absl::Span<const uint64_t> task_ids,
                           bool all_held) {
  absl::MutexLock l(&mu_);
  std::vector<int64_t> ids(task_ids.begin(), task_ids.end());
  if (all_held) {
    departed_.insert(worker);
    for (const auto& [id, e] : tasks_) {
      if (e.state == State::kLeased && e.holder == worker) ids.push_back(id);
    }
  }
  size_t requeued = 0;
  for (int64_t id : ids) {
    auto t = tasks_.find(id);
    if (t == tasks_.end()) continue;
    Entry& e = t->second;
    if (e.state != State::kLeased || e.holder != worker) continue;
    DropLease(e);
    if (e.info.attempts > 0) --e.info.attempts;
    Enqueue(e, /*front=*/true);
    ++requeued;
  }
  return requeued;
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
  const bool leased_to_worker =
      std::find(e.holders.begin(), e.holders.end(),
                std::make_pair(attempt, worker)) != e.holders.end();
  if (!leased_to_worker) {
    return refuse(absl::PermissionDeniedError(absl::StrCat(
        "attempt ", attempt, " of task ", task_id, " was not leased to worker ",
        worker,
        " by this coordinator; a worker may report only tasks leased to it")));
  }
  if (failed_attempt && (e.state != State::kLeased || e.holder != worker ||
                         e.info.attempts != attempt)) {
    return refuse(absl::FailedPreconditionError(
        absl::StrCat("failed attempt ", attempt, " of task ", task_id,
                     " is not from its current lease (attempt ",
                     e.info.attempts, "); not counted")));
  }
  if (e.state == State::kQueued) --runs_[e.info.run_id].queued;
  DropLease(e);
  e.state = State::kClaimed;
  return e.info;
}

void TaskQueue::NoteLease(int64_t worker, uint64_t task_id, uint32_t attempt) {
  absl::MutexLock l(&mu_);
  auto t = tasks_.find(static_cast<int64_t>(task_id));
  if (t == tasks_.end()) return;
  std::vector<std::pair<uint32_t, int64_t>>& holders = t->second.holders;
  const std::pair<uint32_t, int64_t> lease(attempt, worker);
  if (std::find(holders.begin(), holders.end(), lease) != holders.end()) {
    return;
  }
  if (holders.size() >= kMaxHoldersKept) holders.erase(holders.begin());
  holders.insert(holders.begin(), lease);
}

void TaskQueue::Complete(absl::Span<const int64_t> task_ids) {
  absl::MutexLock l(&mu_);
  for (int64_t id : task_ids) {
    auto t = tasks_.find(id);
    if (t != tasks_.end() && t->second.state == State::kClaimed)
      tasks_.erase(t);
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

TaskQueue::Load TaskQueue::load() const {
  absl::MutexLock l(&mu_);
  Load load;
  for (const auto& [id, e] : tasks_) {
    if (e.state == State::kQueued) {
      ++load.queued_by_run[e.info.run_id];
    } else {
      ++load.held_by_worker[e.holder];
    }
  }
  return load;
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
