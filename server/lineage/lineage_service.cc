#include "server/lineage/lineage_service.h"

#include <utility>
#include <vector>

#include "common/status_macros.h"
#include "server/api/grpc_status.h"

namespace skerry::lineage {
namespace {

using api::ToGrpc;
using skerry::v1::LineageChunk;
using skerry::v1::LineageNode;

// Streams a query's head and batches to `writer`; stops when the client has
// gone (cancelled or the write fails).
class ChunkWriter {
 public:
  ChunkWriter(grpc::ServerContext* ctx,
              grpc::ServerWriter<LineageChunk>* writer)
      : ctx_(ctx), writer_(writer) {}

  bool Head(const LineageReader::StreamHead& head) {
    *first_.mutable_genome() = head.genome;
    first_.set_at_most(head.at_most);
    pending_head_ = true;
    return !ctx_->IsCancelled();
  }
  bool Batch(LineageChunk& chunk) {
    if (pending_head_) {
      *chunk.mutable_genome() = first_.genome();
      chunk.set_at_most(first_.at_most());
      pending_head_ = false;
    }
    return !ctx_->IsCancelled() && writer_->Write(chunk);
  }
  // Sends the head alone when no batch carried it (an empty answer).
  grpc::Status Finish(const absl::Status& status) {
    if (!status.ok()) {
      if (absl::IsCancelled(status)) return grpc::Status::CANCELLED;
      return ToGrpc(status);
    }
    if (pending_head_ && !writer_->Write(first_))
      return grpc::Status::CANCELLED;
    return grpc::Status::OK;
  }

 private:
  grpc::ServerContext* const ctx_;
  grpc::ServerWriter<LineageChunk>* const writer_;
  LineageChunk first_;
  bool pending_head_ = false;
};

}  // namespace

absl::StatusOr<std::unique_ptr<LineageServiceImpl>> LineageServiceImpl::Open(
    const std::string& db_path, ReaderOptions options) {
  SKERRY_ASSIGN_OR_RETURN(std::unique_ptr<LineageReader> reader,
                          LineageReader::Open(db_path, options));
  return std::unique_ptr<LineageServiceImpl>(
      new LineageServiceImpl(std::move(reader)));
}

grpc::Status LineageServiceImpl::GetGenomeNode(grpc::ServerContext*,
                                               const skerry::v1::GenomeRef* req,
                                               LineageNode* resp) {
  absl::StatusOr<LineageNode> node = reader_->Resolve(*req);
  if (!node.ok()) return ToGrpc(node.status());
  *resp = *std::move(node);
  return grpc::Status::OK;
}

grpc::Status LineageServiceImpl::StreamAncestors(
    grpc::ServerContext* ctx, const skerry::v1::AncestorsRequest* req,
    grpc::ServerWriter<LineageChunk>* writer) {
  ChunkWriter out(ctx, writer);
  return out.Finish(reader_->Ancestors(
      *req, [&](const LineageReader::StreamHead& h) { return out.Head(h); },
      [&](LineageChunk& b) { return out.Batch(b); }));
}

grpc::Status LineageServiceImpl::StreamDescendants(
    grpc::ServerContext* ctx, const skerry::v1::DescendantsRequest* req,
    grpc::ServerWriter<LineageChunk>* writer) {
  ChunkWriter out(ctx, writer);
  return out.Finish(reader_->Descendants(
      *req, [&](const LineageReader::StreamHead& h) { return out.Head(h); },
      [&](LineageChunk& b) { return out.Batch(b); }));
}

grpc::Status LineageServiceImpl::GetLineOfDescent(
    grpc::ServerContext*, const skerry::v1::LineOfDescentRequest* req,
    skerry::v1::LineOfDescentResponse* resp) {
  auto line = reader_->LineOfDescent(req->genome());
  if (!line.ok()) return ToGrpc(line.status());
  *resp = *std::move(line);
  return grpc::Status::OK;
}

grpc::Status LineageServiceImpl::GetCommonAncestor(
    grpc::ServerContext*, const skerry::v1::CommonAncestorRequest* req,
    skerry::v1::CommonAncestorResponse* resp) {
  auto common = reader_->CommonAncestor(req->a(), req->b());
  if (!common.ok()) return ToGrpc(common.status());
  *resp = *std::move(common);
  return grpc::Status::OK;
}

grpc::Status LineageServiceImpl::GetCoalescence(
    grpc::ServerContext*, const skerry::v1::CoalescenceRequest* req,
    skerry::v1::CoalescenceResponse* resp) {
  auto levels = reader_->Coalescence(*req);
  if (!levels.ok()) return ToGrpc(levels.status());
  *resp = *std::move(levels);
  return grpc::Status::OK;
}

grpc::Status LineageServiceImpl::GetAttribution(
    grpc::ServerContext*, const skerry::v1::AttributionRequest* req,
    skerry::v1::AttributionResponse* resp) {
  auto attribution = reader_->Attribution(req->genome());
  if (!attribution.ok()) return ToGrpc(attribution.status());
  *resp = *std::move(attribution);
  return grpc::Status::OK;
}

}  // namespace skerry::lineage
