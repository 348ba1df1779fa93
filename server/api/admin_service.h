// AdminService: operations on the coordinator itself. Backup streams a
// consistent copy of the database (or of one run) made while the coordinator
// keeps running.
//
// Thread safety: handlers may run concurrently; each backup uses a file of its
// own.
#ifndef SKERRY_SERVER_API_ADMIN_SERVICE_H_
#define SKERRY_SERVER_API_ADMIN_SERVICE_H_

#include <atomic>
#include <string>

#include "skerry/v1/admin.grpc.pb.h"

namespace skerry::api {

class AdminServiceImpl final : public skerry::v1::AdminService::Service {
 public:
  explicit AdminServiceImpl(std::string db_path)
      : db_path_(std::move(db_path)) {}

  grpc::Status Backup(
      grpc::ServerContext* ctx, const skerry::v1::BackupRequest* req,
      grpc::ServerWriter<skerry::v1::BackupChunk>* writer) override;

 private:
  const std::string db_path_;
  std::atomic<int> counter_{0};
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_ADMIN_SERVICE_H_
