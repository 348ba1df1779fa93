#include "server/api/watch_hub.h"

#include <algorithm>
#include <functional>
#include <optional>
#include <utility>

#include "absl/strings/str_cat.h"
#include "common/quote.h"
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

class FollowRefusal final
    : public grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, RunSummary> {
 public:
  explicit FollowRefusal(grpc::Status status) { Finish(std::move(status)); }
  void OnDone() override { delete this; }
};

grpc::Status ShuttingDown() {
  return ToGrpc(absl::UnavailableError(
      "the coordinator is shutting down; watch again when it "
      "is back"));
}

}  // namespace

// One watch stream, WatchRun's or FollowRun's. Every field below is guarded by
// hub_->mu_; gRPC reads out_ while a write is in flight (writing_), when
// nobody changes it.
class WatchHub::Watcher {
 public:
  Watcher(WatchHub* hub, int64_t run_id, absl::Duration interval, bool paced)
      : hub_(hub), run_id_(run_id), interval_(interval), paced_(paced) {}
  virtual ~Watcher() = default;
  virtual void Send(const RunSummary* summary) = 0;  // StartWrite
  virtual void End(grpc::Status status) = 0;         // Finish

  WatchHub* const hub_;
  int64_t run_id_;           // FollowRun: set by its first message
  absl::Duration interval_;  // FollowRun: set by its first message
  const bool paced_;         // FollowRun: send only what was asked for
  uint64_t asked_ = 0;       // paced: summaries asked for, not yet sent
  bool asks_ended_ = false;  // paced: the client will ask for no more
  absl::Time next_due_ = absl::InfinitePast();   // earliest next update
  absl::Time next_drop_ = absl::InfinitePast();  // earliest next drop counted
  uint64_t sent_version_ = 0;
  uint64_t dropped_ = 0;
  bool writing_ = false;
  bool finished_ = false;  // Finish has been (or is being) called
  std::optional<grpc::Status> finish_wanted_;  // finish once idle
  RunSummary out_;
};

class WatchHub::StreamWatcher final
    : public Watcher,
      public grpc::ServerWriteReactor<RunSummary> {
 public:
  StreamWatcher(WatchHub* hub, int64_t run_id, absl::Duration interval)
      : Watcher(hub, run_id, interval, /*paced=*/false) {}
  void Send(const RunSummary* summary) override { StartWrite(summary); }
  void End(grpc::Status status) override { Finish(std::move(status)); }
  void OnWriteDone(bool ok) override { hub_->WriteDone(*this, ok); }
  void OnCancel() override { hub_->Cancelled(*this); }
  void OnDone() override { hub_->Done(this); }
};

class WatchHub::PacedWatcher final
    : public Watcher,
      public grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, RunSummary> {
 public:
  PacedWatcher(WatchHub* hub, std::function<absl::Status()> admit)
      : Watcher(hub, 0, absl::ZeroDuration(), /*paced=*/true),
        admit_(std::move(admit)) {
    StartRead(&in_);
  }
  void Send(const RunSummary* summary) override { StartWrite(summary); }
  void End(grpc::Status status) override { Finish(std::move(status)); }
  void OnReadDone(bool ok) override {
    const skerry::v1::FollowRunRequest request = in_;
    grpc::Status refusal;
    if (ok && !named_) {
      named_ = true;
      if (admit_) refusal = ToGrpc(admit_());
    }
    // Read on at once: the call holds this reactor until this returns.
    if (ok && refusal.ok()) StartRead(&in_);
    hub_->Asked(*this, request, ok, std::move(refusal));
  }
  void OnWriteDone(bool ok) override { hub_->WriteDone(*this, ok); }
  void OnCancel() override { hub_->Cancelled(*this); }
  void OnDone() override { hub_->Done(this); }

 private:
  // Only gRPC and OnReadDone (one at a time) touch these.
  skerry::v1::FollowRunRequest in_;
  bool named_ = false;  // the first message has come
  const std::function<absl::Status()> admit_;
};

WatchHub::WatchHub(engine::Engine* engine, WatchHubOptions options)
    : engine_(engine), options_(options) {
  thread_ = std::thread([this] { Loop(); });
}

WatchHub::~WatchHub() { Shutdown(); }

grpc::ServerWriteReactor<RunSummary>* WatchHub::Refuse(grpc::Status status) {
  return new Refusal(std::move(status));
}

grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, RunSummary>*
WatchHub::RefuseFollow(grpc::Status status) {
  return new FollowRefusal(std::move(status));
}

absl::Duration WatchHub::Interval(uint32_t ms) {
  return absl::Milliseconds(
      ms == 0 ? kDefaultIntervalMs
              : std::clamp(ms, kMinIntervalMs, kMaxIntervalMs));
}

grpc::Status WatchHub::RoomForOneMore() const {
  if (stopping_) return ShuttingDown();
  if (watchers_ < options_.max_watchers) return grpc::Status::OK;
  return ToGrpc(absl::ResourceExhaustedError(
      absl::StrCat("this coordinator already serves ", watchers_,
                   " watch streams, its limit (skerry-coordinator "
                   "--max-watchers ",
                   options_.max_watchers,
                   "); try again when one ends, or raise the limit")));
}

grpc::ServerWriteReactor<RunSummary>* WatchHub::Watch(
    const skerry::v1::WatchRunRequest& request) {
  const int64_t run_id = static_cast<int64_t>(request.run_id());
  absl::MutexLock l(&mu_);
  if (grpc::Status room = RoomForOneMore(); !room.ok()) {
    return new Refusal(std::move(room));
  }
  auto* w = new StreamWatcher(this, run_id, Interval(request.interval_ms()));
  channels_[run_id].watchers.insert(w);
  ++watchers_;
  return w;
}

grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, RunSummary>*
WatchHub::Follow(std::function<absl::Status()> admit) {
  absl::MutexLock l(&mu_);
  if (grpc::Status room = RoomForOneMore(); !room.ok()) {
    return new FollowRefusal(std::move(room));
  }
  auto* w = new PacedWatcher(this, std::move(admit));
  unnamed_.insert(w);
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
    summary->set_name(AnsweredName(summary->name(), options_.max_name_bytes));
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
  if (unnamed_.count(&w) > 0) {
    if (w.finish_wanted_.has_value()) {
      FinishWhenIdle(w, *w.finish_wanted_, actions);
    }
    return;
  }
  const Channel& channel = channels_.at(w.run_id_);
  const bool newer = channel.version > w.sent_version_;
  // Due an update, but the last one is not taken (or, paced, nothing is
  // asked for): this one is dropped.
  auto drop_if_due = [&] {
    if (newer && now >= w.next_due_ && now >= w.next_drop_) {
      ++w.dropped_;
      w.next_drop_ = now + w.interval_;
    }
  };
  if (w.writing_) {
    drop_if_due();
    return;
  }
  if (w.finish_wanted_.has_value()) {
    FinishWhenIdle(w, *w.finish_wanted_, actions);
  } else if (!channel.error.ok()) {
    FinishWhenIdle(w, ToGrpc(channel.error), actions);
  } else if (w.paced_ && w.asked_ == 0) {
    drop_if_due();
    // Nothing asked and nothing more will be: the stream ends.
    if (w.asks_ended_) FinishWhenIdle(w, grpc::Status::OK, actions);
  } else if (newer && now >= w.next_due_) {
    w.out_ = *channel.latest;
    w.out_.set_dropped_updates(w.dropped_);
    w.sent_version_ = channel.version;
    w.next_due_ = now + w.interval_;
    w.writing_ = true;
    if (w.paced_) --w.asked_;
    actions->push_back({&w, /*finish=*/false, grpc::Status::OK});
  } else if (!newer && channel.ended) {
    FinishWhenIdle(w, grpc::Status::OK, actions);  // the final one was taken
  }
}

void WatchHub::Perform(std::vector<Action> actions) {
  for (Action& a : actions) {
    // After Finish, `a.watcher` may be gone (OnDone): touch it no more.
    if (a.finish) {
      a.watcher->End(std::move(a.status));
    } else {
      a.watcher->Send(&a.watcher->out_);
    }
  }
}

void WatchHub::WriteDone(Watcher& w, bool ok) {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    w.writing_ = false;
    if (!ok && !w.finish_wanted_.has_value()) {
      w.finish_wanted_ = ToGrpc(absl::CancelledError("the watcher went away"));
    }
    Step(w, absl::Now(), &actions);  // the newest at once, if it is due
  }
  Perform(std::move(actions));
}

void WatchHub::Asked(Watcher& w, const skerry::v1::FollowRunRequest& request,
                     bool ok, grpc::Status refusal) {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    if (unnamed_.count(&w) > 0) {
      if (!refusal.ok()) {
        FinishWhenIdle(w, std::move(refusal), &actions);
      } else if (!ok) {
        FinishWhenIdle(w,
                       ToGrpc(absl::CancelledError(
                           "the watcher left before naming a run")),
                       &actions);
      } else {
        // The first message names the run and asks for its first summary.
        unnamed_.erase(&w);
        w.run_id_ = static_cast<int64_t>(request.run_id());
        w.interval_ = Interval(request.interval_ms());
        channels_[w.run_id_].watchers.insert(&w);
        w.asked_ = 1;
      }
    } else if (ok) {
      ++w.asked_;
      Step(w, absl::Now(), &actions);
    } else {
      w.asks_ended_ = true;
      Step(w, absl::Now(), &actions);
    }
  }
  Perform(std::move(actions));
}

void WatchHub::Cancelled(Watcher& w) {
  std::vector<Action> actions;
  {
    absl::MutexLock l(&mu_);
    FinishWhenIdle(w, ToGrpc(absl::CancelledError("the watch was cancelled")),
                   &actions);
  }
  Perform(std::move(actions));
}

void WatchHub::Done(Watcher* w) {
  {
    absl::MutexLock l(&mu_);
    auto it =
        unnamed_.erase(w) > 0 ? channels_.end() : channels_.find(w->run_id_);
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
    for (Watcher* w : unnamed_) FinishWhenIdle(*w, ShuttingDown(), &actions);
  }
  Perform(std::move(actions));
  if (thread_.joinable()) thread_.join();
}

size_t WatchHub::watchers() const {
  absl::MutexLock l(&mu_);
  return watchers_;
}

}  // namespace skerry::api
