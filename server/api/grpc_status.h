// The one place where absl::Status becomes grpc::Status and back. Codes map one
// to one (both follow google.rpc.Code); the message is kept.
#ifndef SKERRY_SERVER_API_GRPC_STATUS_H_
#define SKERRY_SERVER_API_GRPC_STATUS_H_

#include "absl/status/status.h"
#include "grpcpp/support/status.h"

namespace skerry::api {

inline grpc::Status ToGrpc(const absl::Status& s) {
  if (s.ok()) return grpc::Status::OK;
  return grpc::Status(static_cast<grpc::StatusCode>(s.code()),
                      std::string(s.message()));
}

inline absl::Status FromGrpc(const grpc::Status& s) {
  if (s.ok()) return absl::OkStatus();
  return absl::Status(static_cast<absl::StatusCode>(s.error_code()),
                      s.error_message());
}

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_GRPC_STATUS_H_
