#include "server/api/admin_service.h"

#include <unistd.h>

#include <cstdio>
#include <vector>

#include "absl/strings/str_cat.h"
#include "server/api/grpc_status.h"
#include "server/store/backup.h"

namespace skerry::api {
namespace {

constexpr size_t kChunkBytes = 1 << 20;

// Removes the temporary copy however the handler ends.
struct RemoveOnExit {
  std::string path;
  ~RemoveOnExit() {
    unlink(path.c_str());
    unlink((path + "-journal").c_str());
  }
};

}  // namespace

grpc::Status AdminServiceImpl::Backup(
    grpc::ServerContext* ctx, const skerry::v1::BackupRequest* req,
    grpc::ServerWriter<skerry::v1::BackupChunk>* writer) {
  // Beside the database: same file system, same permissions.
  RemoveOnExit tmp{absl::StrCat(db_path_, ".backup-", getpid(), "-",
                                counter_.fetch_add(1), ".tmp")};
  unlink(tmp.path.c_str());
  absl::Status made = store::BackupDatabase(
      db_path_, static_cast<int64_t>(req->run_id()), tmp.path);
  if (!made.ok()) return ToGrpc(made);
  FILE* f = std::fopen(tmp.path.c_str(), "rb");
  if (f == nullptr) {
    return ToGrpc(
        absl::InternalError(absl::StrCat("cannot read the copy ", tmp.path)));
  }
  std::fseek(f, 0, SEEK_END);
  const long total = std::ftell(f);
  std::fseek(f, 0, SEEK_SET);
  std::vector<char> buf(kChunkBytes);
  bool first = true;
  while (!ctx->IsCancelled()) {
    const size_t n = std::fread(buf.data(), 1, buf.size(), f);
    if (n == 0 && !first) break;
    skerry::v1::BackupChunk chunk;
    chunk.set_data(buf.data(), n);
    if (first) chunk.set_total_bytes(static_cast<uint64_t>(total));
    first = false;
    if (!writer->Write(chunk)) break;
    if (n < buf.size()) break;
  }
  std::fclose(f);
  return grpc::Status::OK;
}

grpc::Status AdminServiceImpl::ListWorkers(
    grpc::ServerContext* ctx, const skerry::v1::ListWorkersRequest* req,
    skerry::v1::ListWorkersResponse* resp) {
  if (req->limit() > kMaxWorkerLimit) {
    return ToGrpc(absl::InvalidArgumentError(absl::StrCat(
        "limit: at most ", kMaxWorkerLimit, ", got ", req->limit())));
  }
  if (!worker_source_) {
    return ToGrpc(
        absl::UnimplementedError("this coordinator keeps no worker list"));
  }
  absl::StatusOr<skerry::v1::ListWorkersResponse> workers =
      worker_source_(req->limit() == 0 ? kDefaultWorkerLimit : req->limit());
  if (!workers.ok()) return ToGrpc(workers.status());
  *resp = *std::move(workers);
  return grpc::Status::OK;
}

}  // namespace skerry::api
