// RunService: the people's side of the coordinator (submit, inspect, steer,
// watch). Reads come from the engine's cache and the store; every change goes
// through the engine so it is committed before it is answered.
//
// WatchRun and FollowRun are callback methods served by the watch hub
// (watch_hub.h): no server thread waits on a watcher.
//
// Thread safety: gRPC calls the handlers from many threads; the service holds
// no state of its own beyond the watch hub.
#ifndef SKERRY_SERVER_API_RUN_SERVICE_H_
#define SKERRY_SERVER_API_RUN_SERVICE_H_

#include "common/spec.h"
#include "server/api/fleet_service.h"
#include "server/api/watch_hub.h"
#include "server/auth/access_control.h"
#include "server/engine/engine.h"
#include "server/store/store.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::api {

// The user API's view of a stored genome.
skerry::v1::Genome ToGenomeProto(const store::GenomeRecord& g);

class RunServiceImpl final
    : public skerry::v1::RunService::WithCallbackMethod_WatchRun<
          skerry::v1::RunService::WithCallbackMethod_FollowRun<
              skerry::v1::RunService::Service>> {
 public:
  // Who may call what is decided before a handler runs (server/auth);
  // `access` names the caller (a run's owner) and takes audit notes.
  // `budgets` bound every submitted spec (common/spec.h); the default is no
  // budget.
  RunServiceImpl(store::Store* store, engine::Engine* engine,
                 FleetServiceImpl* fleet, auth::AccessControl* access,
                 WatchHubOptions watch = {}, SpecBudgets budgets = {})
      : store_(store),
        engine_(engine),
        fleet_(fleet),
        access_(access),
        budgets_(budgets),
        watch_hub_(engine, WithNameBound(watch, budgets)) {}

  // The watch options, with run names bounded like every other answer's.
  static WatchHubOptions WithNameBound(WatchHubOptions watch,
                                       const SpecBudgets& budgets) {
    watch.max_name_bytes = budgets.max_name_bytes;
    return watch;
  }

  // Ends every watch stream (UNAVAILABLE); call before the server shuts down.
  void ShutdownWatches() { watch_hub_.Shutdown(); }

  grpc::Status SubmitRun(grpc::ServerContext* ctx,
                         const skerry::v1::SubmitRunRequest* req,
                         skerry::v1::SubmitRunResponse* resp) override;
  grpc::Status ListRuns(grpc::ServerContext* ctx,
                        const skerry::v1::ListRunsRequest* req,
                        skerry::v1::ListRunsResponse* resp) override;
  grpc::Status GetRun(grpc::ServerContext* ctx, const skerry::v1::RunRef* req,
                      skerry::v1::GetRunResponse* resp) override;
  grpc::Status PauseRun(grpc::ServerContext* ctx, const skerry::v1::RunRef* req,
                        skerry::v1::RunSummary* resp) override;
  grpc::Status ResumeRun(grpc::ServerContext* ctx,
                         const skerry::v1::RunRef* req,
                         skerry::v1::RunSummary* resp) override;
  grpc::Status StopRun(grpc::ServerContext* ctx, const skerry::v1::RunRef* req,
                       skerry::v1::RunSummary* resp) override;
  grpc::Status GetChampion(grpc::ServerContext* ctx,
                           const skerry::v1::RunRef* req,
                           skerry::v1::GetChampionResponse* resp) override;
  grpc::Status GetHistory(grpc::ServerContext* ctx,
                          const skerry::v1::GetHistoryRequest* req,
                          skerry::v1::GetHistoryResponse* resp) override;
  grpc::Status GetDigest(grpc::ServerContext* ctx,
                         const skerry::v1::RunRef* req,
                         skerry::v1::DigestResponse* resp) override;
  grpc::Status SetPriority(grpc::ServerContext* ctx,
                           const skerry::v1::SetPriorityRequest* req,
                           skerry::v1::RunSummary* resp) override;
  // run_service_fork.cc
  grpc::Status ForkRun(grpc::ServerContext* ctx,
                       const skerry::v1::ForkRunRequest* req,
                       skerry::v1::SubmitRunResponse* resp) override;
  grpc::Status DeleteRun(grpc::ServerContext* ctx,
                         const skerry::v1::RunRef* req,
                         skerry::v1::DeleteRunResponse* resp) override;
  // run_service_archive.cc
  grpc::Status ArchiveRun(
      grpc::ServerContext* ctx, const skerry::v1::ArchiveRunRequest* req,
      grpc::ServerWriter<skerry::v1::ArchiveChunk>* writer) override;
  grpc::Status ImportRuns(grpc::ServerContext* ctx,
                          const skerry::v1::ImportRunsRequest* req,
                          skerry::v1::ImportRunsResponse* resp) override;
  grpc::ServerWriteReactor<skerry::v1::RunSummary>* WatchRun(
      grpc::CallbackServerContext* ctx,
      const skerry::v1::WatchRunRequest* req) override;
  grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, skerry::v1::RunSummary>*
  FollowRun(grpc::CallbackServerContext* ctx) override;

 private:
  grpc::Status Summarise(int64_t run_id, skerry::v1::RunSummary* out);

  store::Store* const store_;
  engine::Engine* const engine_;
  FleetServiceImpl* const fleet_;
  auth::AccessControl* const access_;
  const SpecBudgets budgets_;
  WatchHub watch_hub_;
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_RUN_SERVICE_H_
