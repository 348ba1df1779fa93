// The one place where absl::Status becomes grpc::Status and back. Codes map one
// to one (both follow google.rpc.Code); the message is kept.
#ifndef SKERRY_SERVER_API_GRPC_STATUS_H_
#define SKERRY_SERVER_API_GRPC_STATUS_H_

#include "absl/status/status.h"
#include "grpcpp/support/status.h"

namespace skerry::api {

// Sent as the error details of every UNAVAILABLE the coordinator itself
// answers (storage trouble, shutting down), so that a client can tell "the
// coordinator answered: unavailable" from "nothing answered", which gRPC
// reports with the same code (cli/client.h, IsUnreachable).
inline constexpr char kAnsweredUnavailable[] = "skerry-coordinator-answered";

inline grpc::Status ToGrpc(const absl::Status& s) {
  if (s.ok()) return grpc::Status::OK;
  if (absl::IsUnavailable(s)) {
    return grpc::Status(grpc::StatusCode::UNAVAILABLE, std::string(s.message()),
                        kAnsweredUnavailable);
  }
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
