// LineageService (proto/skerry/v1/lineage.proto): the lineage queries over
// gRPC. Ancestors and descendants are server streams of batches; everything
// else is unary. All answers come from a LineageReader on read-only
// connections of its own, so queries never wait for, or delay, the engine.
//
// Thread safety: gRPC calls the handlers from many threads; the reader is
// thread-safe and the service holds no other state.
#ifndef SKERRY_SERVER_LINEAGE_LINEAGE_SERVICE_H_
#define SKERRY_SERVER_LINEAGE_LINEAGE_SERVICE_H_

#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "server/lineage/lineage_reader.h"
#include "skerry/v1/lineage.grpc.pb.h"

namespace skerry::lineage {

class LineageServiceImpl final : public skerry::v1::LineageService::Service {
 public:
  // Opens a reader on the database file `db_path`.
  static absl::StatusOr<std::unique_ptr<LineageServiceImpl>> Open(
      const std::string& db_path, ReaderOptions options = {});

  grpc::Status GetGenomeNode(grpc::ServerContext* ctx,
                             const skerry::v1::GenomeRef* req,
                             skerry::v1::LineageNode* resp) override;
  grpc::Status StreamAncestors(
      grpc::ServerContext* ctx, const skerry::v1::AncestorsRequest* req,
      grpc::ServerWriter<skerry::v1::LineageChunk>* writer) override;
  grpc::Status StreamDescendants(
      grpc::ServerContext* ctx, const skerry::v1::DescendantsRequest* req,
      grpc::ServerWriter<skerry::v1::LineageChunk>* writer) override;
  grpc::Status GetLineOfDescent(
      grpc::ServerContext* ctx, const skerry::v1::LineOfDescentRequest* req,
      skerry::v1::LineOfDescentResponse* resp) override;
  grpc::Status GetCommonAncestor(
      grpc::ServerContext* ctx, const skerry::v1::CommonAncestorRequest* req,
      skerry::v1::CommonAncestorResponse* resp) override;
  grpc::Status GetCoalescence(grpc::ServerContext* ctx,
                              const skerry::v1::CoalescenceRequest* req,
                              skerry::v1::CoalescenceResponse* resp) override;
  grpc::Status GetAttribution(grpc::ServerContext* ctx,
                              const skerry::v1::AttributionRequest* req,
                              skerry::v1::AttributionResponse* resp) override;

 private:
  explicit LineageServiceImpl(std::unique_ptr<LineageReader> reader)
      : reader_(std::move(reader)) {}

  const std::unique_ptr<LineageReader> reader_;
};

}  // namespace skerry::lineage

#endif  // SKERRY_SERVER_LINEAGE_LINEAGE_SERVICE_H_
