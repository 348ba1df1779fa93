// The watch hub: serves RunService.WatchRun to any number of watchers without
// letting a slow one slow the run, the coordinator or the other watchers.
//
// One hub thread waits for the engine's change counter. At most once per tick,
// for every run somebody watches, it computes the run's summary once
// (Engine::Summary) and shares it with all of that run's watchers: the cost of
// a change is one summary per watched run, not one per watcher.
//
// Each watcher is a gRPC callback reactor: it holds no server thread while it
// waits for changes or while its client is slow to read. It has room for one
// summary being written; newer summaries are not queued behind it, the
// watcher is simply sent the newest when its write completes (latest wins).
// So its memory is bounded and a client that never reads costs one message.
// A watcher is due an update once its interval has passed since the last one
// and a newer summary exists. When it is due but its previous write has not
// completed, that update is dropped: dropped_updates (RunSummary field 17)
// counts such misses, at most one per interval, and every summary it is sent
// carries the count so far. The final summary of an ended run is never
// dropped: it is sent once the watcher takes it, then the stream ends (OK).
// A WatchRun write completes when gRPC's flow control admits it, that is once
// the client's library has room for it in its receive window, not when the
// client's program reads it: a WatchRun client that stops reading gets what
// its window already holds before the newest summary and the count. FollowRun
// (client-paced, a bidi stream) removes that cause: a summary is sent only
// when the client asks for one, one per request message, so a client that
// stops reading and asking holds at most the one it asked for; an update due
// with nothing asked is dropped and counted the same way, and the final
// summary waits to be asked for (docs/sharing.md).
//
// Limits: at most `max_watchers` streams at once per coordinator; one more is
// refused with RESOURCE_EXHAUSTED naming the limit. A run that does not exist
// ends the stream with the engine's error (NOT_FOUND). Shutdown() ends every
// stream with UNAVAILABLE ("shutting down"), so a CLI reconnects.
//
// Thread safety: Watch() is called from gRPC's threads, Shutdown() from any
// thread; the hub must outlive the gRPC server (reactors call back into it
// until their OnDone).
#ifndef SKERRY_SERVER_API_WATCH_HUB_H_
#define SKERRY_SERVER_API_WATCH_HUB_H_

#include <cstddef>
#include <cstdint>
#include <functional>
#include <map>
#include <memory>
#include <set>
#include <string>
#include <thread>
#include <vector>

#include "absl/base/thread_annotations.h"
#include "absl/status/status.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "grpcpp/support/server_callback.h"
#include "server/engine/engine.h"
#include "skerry/v1/runs.pb.h"

namespace skerry::api {

struct WatchHubOptions {
  size_t max_watchers = 256;  // concurrent WatchRun streams per coordinator
  // How often the hub looks for changes and due watchers: the finest
  // interval a watcher can get, and the delay of its first summary.
  absl::Duration tick = absl::Milliseconds(20);
  // Run names longer than this are sent cut and marked (AnsweredName in
  // common/quote.h); 0: its fallback.
  size_t max_name_bytes = 0;
};

class WatchHub {
 public:
  // Watch intervals are clamped to this range; 0 asks for the default.
  static constexpr uint32_t kMinIntervalMs = 50;
  static constexpr uint32_t kMaxIntervalMs = 60000;
  static constexpr uint32_t kDefaultIntervalMs = 500;

  WatchHub(engine::Engine* engine, WatchHubOptions options);
  ~WatchHub();  // Shutdown()
  WatchHub(const WatchHub&) = delete;
  WatchHub& operator=(const WatchHub&) = delete;

  // The reactor that serves one WatchRun call (or refuses it).
  grpc::ServerWriteReactor<skerry::v1::RunSummary>* Watch(
      const skerry::v1::WatchRunRequest& request);

  // The reactor that serves one FollowRun call: its first message names the
  // run. `admit`, when set, is asked once that message has come (its access
  // check); a refusal ends the call with it.
  grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, skerry::v1::RunSummary>*
  Follow(std::function<absl::Status()> admit);

  // A reactor that ends the call with `status` at once (a refused call).
  static grpc::ServerWriteReactor<skerry::v1::RunSummary>* Refuse(
      grpc::Status status);
  static grpc::ServerBidiReactor<skerry::v1::FollowRunRequest,
                                 skerry::v1::RunSummary>*
  RefuseFollow(grpc::Status status);

  // Ends every stream with UNAVAILABLE, refuses new ones, and stops the hub
  // thread. Streams whose last write is stuck end when gRPC cancels them.
  void Shutdown();

  // Streams not yet done (for tests and logs).
  size_t watchers() const;

 private:
  class Watcher;
  class StreamWatcher;
  class PacedWatcher;
  // One watched run: its newest summary and who watches it.
  struct Channel {
    std::shared_ptr<const skerry::v1::RunSummary> latest;
    std::string compared;  // `latest` without its timestamp, serialised
    uint64_t version = 0;  // grows with every new summary
    bool ended = false;    // `latest` is final: nothing newer will come
    absl::Status error;    // the run cannot be summarised (ends every watch)
    std::set<Watcher*> watchers;
  };
  // What to do to a watcher once mu_ is released (gRPC calls are never made
  // while holding it).
  struct Action {
    Watcher* watcher = nullptr;
    bool finish = false;  // false: start the write of watcher->out_
    grpc::Status status;
  };

  void Loop();
  bool AwakeOrStopping() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Computes the summary of every watched run whose state may have changed.
  void Refresh(bool engine_changed) ABSL_LOCKS_EXCLUDED(mu_);
  // Decides the next step of `w` at time `now`.
  void Step(Watcher& w, absl::Time now, std::vector<Action>* actions)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  // Marks `w` finished with `status` if nothing is in flight.
  void FinishWhenIdle(Watcher& w, grpc::Status status,
                      std::vector<Action>* actions)
      ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);
  static void Perform(std::vector<Action> actions);  // without mu_

  // Clamps a requested interval (0: the default).
  static absl::Duration Interval(uint32_t ms);
  // RESOURCE_EXHAUSTED when another watcher would pass the limit.
  grpc::Status RoomForOneMore() const ABSL_EXCLUSIVE_LOCKS_REQUIRED(mu_);

  // Reactions of a watcher (from gRPC's threads).
  void WriteDone(Watcher& w, bool ok) ABSL_LOCKS_EXCLUDED(mu_);
  // A FollowRun request arrived (ok), or the client will send no more.
  // `refusal`: the first message was refused access; the call ends with it.
  void Asked(Watcher& w, const skerry::v1::FollowRunRequest& request, bool ok,
             grpc::Status refusal) ABSL_LOCKS_EXCLUDED(mu_);
  void Cancelled(Watcher& w) ABSL_LOCKS_EXCLUDED(mu_);
  void Done(Watcher* w) ABSL_LOCKS_EXCLUDED(mu_);

  // Constant after construction.
  engine::Engine* const engine_;
  const WatchHubOptions options_;

  mutable absl::Mutex mu_;
  std::map<int64_t, Channel> channels_ ABSL_GUARDED_BY(mu_);
  // FollowRun watchers whose first message (naming the run) has not come.
  std::set<Watcher*> unnamed_ ABSL_GUARDED_BY(mu_);
  size_t watchers_ ABSL_GUARDED_BY(mu_) = 0;
  bool stopping_ ABSL_GUARDED_BY(mu_) = false;

  std::thread thread_;
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_WATCH_HUB_H_
