// ValidationService: held-out validation scores of genomes (validation.proto).
// Requests go through the engine (stored before they are answered, then queued
// for the fleet); reads come from the store.
//
// Thread safety: gRPC calls the handlers from many threads; the service holds
// no state of its own.
#ifndef SKERRY_SERVER_API_VALIDATION_SERVICE_H_
#define SKERRY_SERVER_API_VALIDATION_SERVICE_H_

#include "absl/status/statusor.h"
#include "server/auth/access_control.h"
#include "server/engine/engine.h"
#include "server/store/store.h"
#include "skerry/v1/validation.grpc.pb.h"

namespace skerry::api {

skerry::v1::Validation ToValidationProto(const store::ValidationRecord& v);

// The genome a GenomeRef names: its id. NotFound names what is missing;
// InvalidArgument for an empty reference.
absl::StatusOr<int64_t> ResolveGenome(store::Store* store,
                                      const skerry::v1::GenomeRef& ref);

class ValidationServiceImpl final
    : public skerry::v1::ValidationService::Service {
 public:
  ValidationServiceImpl(store::Store* store, engine::Engine* engine,
                        auth::AccessControl* access)
      : store_(store), engine_(engine), access_(access) {}

  grpc::Status Validate(grpc::ServerContext* ctx,
                        const skerry::v1::ValidateRequest* req,
                        skerry::v1::Validation* resp) override;
  grpc::Status GetValidation(grpc::ServerContext* ctx,
                             const skerry::v1::GenomeRef* req,
                             skerry::v1::Validation* resp) override;
  grpc::Status ListValidations(
      grpc::ServerContext* ctx, const skerry::v1::ListValidationsRequest* req,
      skerry::v1::ListValidationsResponse* resp) override;

 private:
  store::Store* const store_;
  engine::Engine* const engine_;
  auth::AccessControl* const access_;  // who asks; audit details
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_VALIDATION_SERVICE_H_
