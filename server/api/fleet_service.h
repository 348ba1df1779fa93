// FleetService: the workers' side of the coordinator (Join, Lease, Report,
// HandBack).
//
// It checks every message from outside before anything reaches the engine: a
// worker must quote the worker secret Join gave it with its id (a wrong one
// gets NOT_FOUND, "join again"; a right one is taken after a coordinator
// restart too, so a worker keeps its id and its leases' results), sizes
// are bounded, and a Report is answered only after its results are committed.
// Every field of every result is checked here, and a bad result is rejected
// alone (INVALID_ARGUMENT in its RejectedResult), so nothing a worker sends can
// fail the group commit that holds other workers' results. Whose results are
// taken is the task queue's result rule (server/scheduler/task_queue.h); each
// task leased carries a lease proof, and a result quoting a valid one is known
// as that worker's lease even when an earlier process made it
// (server/auth/fleet_seal.h).
//
// Thread safety: gRPC calls the handlers from many threads; all state is
// guarded.
#ifndef SKERRY_SERVER_API_FLEET_SERVICE_H_
#define SKERRY_SERVER_API_FLEET_SERVICE_H_

#include <cstdint>
#include <map>
#include <memory>
#include <string>

#include "absl/base/thread_annotations.h"
#include "absl/synchronization/mutex.h"
#include "absl/time/time.h"
#include "common/clock.h"
#include "server/auth/fleet_seal.h"
#include "server/engine/engine.h"
#include "server/http/fleet_metrics.h"
#include "server/scheduler/task_queue.h"
#include "server/store/store.h"
#include "skerry/v1/fleet.grpc.pb.h"

namespace skerry::api {

class FleetServiceImpl final : public skerry::v1::FleetService::Service {
 public:
  static constexpr uint32_t kMaxTasksPerLease = 10000;
  static constexpr int kMaxResultsPerReport = 100000;
  // Bytes of tasks in one Lease answer: half the coordinator's 128 MiB
  // message limit (server/coordinator.cc); one task is always sent, and
  // --max-task-bytes may not exceed this.
  static constexpr size_t kMaxLeaseBytes = 64 << 20;
  // What one Lease answer aims at: tasks are added while they fit in 16 MiB
  // (one task is always sent, up to kMaxLeaseBytes). A worker needs only its
  // threads' worth ahead, and the coordinator builds each answer in memory
  // before it is sent, twice over (messages, then bytes): bigger answers of
  // long genomes only made its memory peak higher (issue 14).
  static constexpr size_t kLeaseAnswerBytes = 16 << 20;
  // Bounds of a TaskResult's fields (docs/protocol.md, "Bounds").
  static constexpr double kMaxEvalSeconds = 1e7;  // about 116 days
  static constexpr size_t kMaxResultErrorBytes = 1 << 20;

  FleetServiceImpl(store::Store* store, engine::Engine* engine,
                   scheduler::TaskQueue* queue, Clock* clock,
                   absl::Duration max_wait);

  grpc::Status Join(grpc::ServerContext* ctx,
                    const skerry::v1::JoinRequest* req,
                    skerry::v1::JoinResponse* resp) override;
  grpc::Status Lease(grpc::ServerContext* ctx,
                     const skerry::v1::LeaseRequest* req,
                     skerry::v1::LeaseResponse* resp) override;
  grpc::Status Report(grpc::ServerContext* ctx,
                      const skerry::v1::ReportRequest* req,
                      skerry::v1::ReportResponse* resp) override;
  // A leaving worker's tasks are queued again at once (TaskQueue::HandBack).
  grpc::Status HandBack(grpc::ServerContext* ctx,
                        const skerry::v1::HandBackRequest* req,
                        skerry::v1::HandBackResponse* resp) override;

  // Workers heard from within the last `within`.
  int ActiveWorkers(absl::Duration within);
  // Counts each Report's results there (server/http/fleet_metrics.h); call
  // before serving. nullptr: count nothing.
  void set_metrics(http::FleetMetrics* metrics) { metrics_ = metrics; }

 private:
  // OK when `secret` is the worker secret of `worker_id`; the worker is then
  // known (again) and seen now.
  absl::Status CheckWorker(uint64_t worker_id, const std::string& secret);
  // The seal made from the store's fleet key, read at the first call.
  absl::StatusOr<const auth::FleetSeal*> Seal();
  // InvalidArgument naming results[index] and the field when a result
  // cannot be stored as it is.
  static absl::Status CheckResult(const skerry::v1::TaskResult& r, int index);

  store::Store* const store_;
  engine::Engine* const engine_;
  scheduler::TaskQueue* const queue_;
  Clock* const clock_;
  const absl::Duration max_wait_;
  http::FleetMetrics* metrics_ = nullptr;  // set before serving

  absl::Mutex mu_;
  std::map<uint64_t, absl::Time> last_seen_ ABSL_GUARDED_BY(mu_);
  std::unique_ptr<const auth::FleetSeal> seal_ ABSL_GUARDED_BY(mu_);
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_FLEET_SERVICE_H_
