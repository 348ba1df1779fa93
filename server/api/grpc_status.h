// The one place where absl::Status becomes grpc::Status and back. Codes map one
// to one (both follow google.rpc.Code); the message is kept, up to
// kMaxStatusMessageBytes: it travels in a trailer, which default clients cap
// at 8 KiB (from memory), so a message that quotes too much outside input
// must not make the answer unreadable. Messages should quote input with
// QuotePrefix (common/quote.h) anyway; this is the backstop.
//
// Thread safety: pure functions.
#ifndef SKERRY_SERVER_API_GRPC_STATUS_H_
#define SKERRY_SERVER_API_GRPC_STATUS_H_

#include <cstddef>
#include <string>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "common/quote.h"
#include "grpcpp/support/status.h"

namespace skerry::api {

// Sent as the error details of every UNAVAILABLE the coordinator itself
// answers (storage trouble, shutting down), so that a client can tell "the
// coordinator answered: unavailable" from "nothing answered", which gRPC
// reports with the same code (cli/client.h, IsUnreachable).
inline constexpr char kAnsweredUnavailable[] = "skerry-coordinator-answered";

inline constexpr size_t kMaxStatusMessageBytes = 1024;

inline grpc::Status ToGrpc(const absl::Status& s) {
  if (s.ok()) return grpc::Status::OK;
  std::string message(Utf8Prefix(s.message(), kMaxStatusMessageBytes));
  if (message.size() < s.message().size()) {
    absl::StrAppend(&message, " [", s.message().size() - message.size(),
                    " more bytes cut]");
  }
  if (absl::IsUnavailable(s)) {
    return grpc::Status(grpc::StatusCode::UNAVAILABLE, message,
                        kAnsweredUnavailable);
  }
  return grpc::Status(static_cast<grpc::StatusCode>(s.code()), message);
}

inline absl::Status FromGrpc(const grpc::Status& s) {
  if (s.ok()) return absl::OkStatus();
  return absl::Status(static_cast<absl::StatusCode>(s.error_code()),
                      s.error_message());
}

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_GRPC_STATUS_H_
