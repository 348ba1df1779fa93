#include "server/api/watch_hub.h"

#include <algorithm>
#include <optional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "server/api/grpc_status.h"

namespace skerry::api {
namespace {

using skerry::v1::RunSummary;

bool IsEnded(skerry::v1::RunState s) {
  return s == skerry::v1::FINISHED || s == skerry::v1::STOPPED ||
         s == skerry::v1::FAILED_RUN;
}

// A call refused before it started: finishes at once, frees itself when done.
class Refusal final : public grpc::ServerWriteReactor<RunSummary> {
 public:
  explicit Refusal(grpc::Status status) { Finish(std::move(status)); }
  void OnDone() override { delete this; }
};

grpc::Status ShuttingDown() {
  return grpc::Status(grpc::StatusCode::UNAVAILABLE,
                      "the coordinator is shutting down; watch again when it "
                      "is back");
}

}  // namespace

// One WatchRun stream. Every field below is guarded by hub_->mu_; gRPC reads
// out_ while a write is in flight (writing_), when nobody changes it.
class WatchHub::Watcher final : public grpc::ServerWriteReactor<RunSummary> {
 public:
  Watcher(WatchHub* hub, int64_t run_id, absl::Duration interval)
      : hub_(hub), run_id_(run_id), interval_(interval) {}

  void OnWriteDone(bool ok) override { hub_->WriteDone(*this, ok); }
  void OnCancel() override { hub_->Cancelled(*this); }
  void OnDone() override { hub_->Done(this); }

  WatchHub* const hub_;
  const int64_t run_id_;
  const absl::Duration interval_;
  absl::Time next_due_ = absl::InfinitePast();   // earliest next update
  absl::Time next_drop_ = absl::InfinitePast();  // earliest next drop counted
  uint64_t sent_version_ = 0;
  uint64_t dropped_ = 0;
  bool writing_ = false;
  bool finished_ = false;  // Finish has been (or is being) called
  std::optional<grpc::Status> finish_wanted_;  // finish once idle
  RunSummary out_;
};

WatchHub::WatchHub(engine::Engine* engine, WatchHubOptions options)
    : engine_(engine), options_(options) {
  thread_ = std::thread([this] { Loop(); });
}

WatchHub::~WatchHub() { Shutdown(); }

grpc::ServerWriteReactor<RunSummary>* WatchHub::Refuse(grpc::Status status) {
  return new Refusal(std::move(status));
}

grpc::ServerWriteReactor<RunSummary>* WatchHub::Watch(
    const skerry::v1::WatchRunRequest& request) {
  const uint32_t ms =
      request.interval_ms() == 0
          ? kDefaultIntervalMs
          : std::clamp(request.interval_ms(), kMinIntervalMs, kMaxIntervalMs);
  const int64_t run_id = static_cast<int64_t>(request.run_id());
  absl::MutexLock l(&mu_);
  if (stopping_) return new Refusal(ShuttingDown());
  if (watchers_ >= options_.max_watchers) {
    return new Refusal(grpc::Status(
        grpc::StatusCode::RESOURCE_EXHAUSTED,
        absl::StrCat("this coordinator already serves ", watchers_,
                     " watch streams, its limit (skerry-coordinator "
                     "--max-watchers ",
                     options_.max_watchers,
                     "); try again when one ends, or raise the limit")));
  }
  auto* w = new Watcher(this, run_id, absl::Milliseconds(ms));
  channels_[run_id].watchers.insert(w);
  ++watchers_;
  return w;
}

bool WatchHub::AwakeOrStopping() const {
  return stopping_ || !channels_.empty();
}

void WatchHub::Loop() {
  uint64_t seen = 0;  // the engine's change counter at the last refresh
  while (true) {
    {
      absl::MutexLock l(&mu_);
      // Nobody watching: sleep until somebody does.
      mu_.Await(absl::Condition(this, &WatchHub::AwakeOrStopping));
      mu_.AwaitWithTimeout(absl::Condition(&stopping_), options_.tick);
      if (stopping_) return;
    }
    const uint64_t counter =
        engine_->WaitForChange(seen, absl::InfinitePast());  // no waiting
    Refresh(counter != seen);
    seen = counter;
    std::vector<Action> actions;
    {
      absl::MutexLock l(&mu_);
      const absl::Time now = absl::Now();
      for (auto& [run_id, channel] : channels_) {
        for (Watcher* w : channel.watchers) Step(*w, now, &actions);
      }
    }
    Perform(std::move(actions));
  }
}

void WatchHub::Refresh(bool engine_changed) {
  std::vector<int64_t> due;
  {
    absl::MutexLock l(&mu_);
    for (const auto& [run_id, channel] : channels_) {
      if (channel.ended || !channel.error.ok()) continue;
      if (engine_changed || channel.version == 0) due.push_back(run_id);
    }
  }
  for (int64_t run_id : due) {
    // Outside mu_: the engine may be committing.
    absl::StatusOr<RunSummary> summary = engine_->Summary(run_id);
    absl::MutexLock l(&mu_);
    auto it = channels_.find(run_id);
    if (it == channels_.end()) continue;  // its watchers left meanwhile
    Channel& channel = it->second;
    if (!summary.ok()) {
      channel.error = summary.status();
      continue;
    }
    RunSummary compared = *summary;
    compared.set_updated_unix_ms(0);  // content, not timestamps
    std::string bytes = compared.SerializeAsString();
    if (channel.version > 0 && bytes == channel.compared) continue;
    channel.compared = std::move(bytes);
    channel.ended = IsEnded(summary->state());
    channel.latest = std::make_shared<const RunSummary>(*std::move(summary));
    ++channel.version;
  }
}

void WatchHub::FinishWhenIdle(Watcher& w, grpc::Status status,
                              std::vector<Action>* actions) {
  if (w.finished_) return;
  if (w.writing_) {
    if (!w.finish_wanted_.has_value()) w.finish_wanted_ = std::move(status);
    return;
  }
  w.finished_ = true;
  actions->push_back({&w, /*finish=*/true, std::move(status)});
}

void WatchHub::Step(Watcher& w, absl::Time now, std::vector<Action>* actions) {
  if (w.finished_) return;
  const Channel& channel = channels_.at(w.run_id_);
  const bool newer = channel.version > w.sent_version_;
  if (w.writing_) {
    // Due an update, but the last one is not taken yet: this one is dropped.
    if (newer && now >= w.next_due_ && now >= w.next_drop_) {
      ++w.dropped_;
      w.next_drop_ = now + w.interval_;
    }
    return;
  }
  if (w.finish_wanted_.has_value()) {
    FinishWhenIdle(w, *w.finish_wanted_, actions);
  } else if (!channel.error.ok()) {
    FinishWhenIdle(w, ToGrpc(channel.error), actions);
  } else if (newer && now >= w.next_due_) {
    w.out_ = *channel.latest;
    w.out_.set_dropped_updates(w.dropped_);
    w.sent_version_ = channel.version;
    w.next_due_ = now + w.interval_;
    w.writing_ = true;
    actions->push_back({&w, /*finish=*/false, grpc::Status::OK});
  } else if (!newer && channel.ended) {
    FinishWhenIdle(w, grpc::Status::OK, actions);  // the final one was taken
  }
}

void WatchHub::Perform(std::vector<Action> actions) {
  for (Action& a : actions) {
    // After Finish, `a.watcher` may be gone (OnDone): touch it no more.
    if (a.finish) {
      a.watcher->Finish(std::move(a.status));
    } else {
      a.watcher->StartWrite(&a.watcher->out_);
    }
  }
}

void WatchHub::WriteDone(Watcher& w, bool ok) {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    w.writing_ = false;
    if (!ok && !w.finish_wanted_.has_value()) {
      w.finish_wanted_ =
          grpc::Status(grpc::StatusCode::CANCELLED, "the watcher went away");
    }
    Step(w, absl::Now(), &actions);  // the newest at once, if it is due
  }
  Perform(std::move(actions));
}

void WatchHub::Cancelled(Watcher& w) {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    FinishWhenIdle(
        w, grpc::Status(grpc::StatusCode::CANCELLED, "the watch was cancelled"),
        &actions);
  }
  Perform(std::move(actions));
}

void WatchHub::Done(Watcher* w) {
  {
    absl::MutexLock l(&mu_);
    auto it = channels_.find(w->run_id_);
    if (it != channels_.end()) {
      it->second.watchers.erase(w);
      if (it->second.watchers.empty()) channels_.erase(it);
    }
    --watchers_;
  }
  delete w;
}

void WatchHub::Shutdown() {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    stopping_ = true;
    for (auto& [run_id, channel] : channels_) {
      for (Watcher* w : channel.watchers) {
        FinishWhenIdle(*w, ShuttingDown(), &actions);
      }
    }
  }
  Perform(std::move(actions));
  if (thread_.joinable()) thread_.join();
}

size_t WatchHub::watchers() const {
  absl::MutexLock l(&mu_);
  return watchers_;
}

}  // namespace skerry::api
