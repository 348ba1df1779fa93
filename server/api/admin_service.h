// AdminService: operations on the coordinator itself. Backup streams a
// consistent copy of the database (or of one run) made while the coordinator
// keeps running; ListWorkers lists the fleet (from a source the coordinator
// sets, server/http/fleet_status.h).
//
// Thread safety: handlers may run concurrently; each backup uses a file of its
// own.
#ifndef SKERRY_SERVER_API_ADMIN_SERVICE_H_
#define SKERRY_SERVER_API_ADMIN_SERVICE_H_

#include <atomic>
#include <functional>
#include <string>

#include "absl/status/statusor.h"
#include "skerry/v1/admin.grpc.pb.h"

namespace skerry::api {

class AdminServiceImpl final : public skerry::v1::AdminService::Service {
 public:
  explicit AdminServiceImpl(std::string db_path)
      : db_path_(std::move(db_path)) {}

  grpc::Status Backup(
      grpc::ServerContext* ctx, const skerry::v1::BackupRequest* req,
      grpc::ServerWriter<skerry::v1::BackupChunk>* writer) override;

  static constexpr uint32_t kDefaultWorkerLimit = 1000;
  static constexpr uint32_t kMaxWorkerLimit = 10000;
  using WorkerSource =
      std::function<absl::StatusOr<skerry::v1::ListWorkersResponse>(
          uint32_t limit)>;
  // Call before serving.
  void SetWorkerSource(WorkerSource source) {
    worker_source_ = std::move(source);
  }
  grpc::Status ListWorkers(grpc::ServerContext* ctx,
                           const skerry::v1::ListWorkersRequest* req,
                           skerry::v1::ListWorkersResponse* resp) override;

 private:
  const std::string db_path_;
  std::atomic<int> counter_{0};
  WorkerSource worker_source_;  // set before serving
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_ADMIN_SERVICE_H_
