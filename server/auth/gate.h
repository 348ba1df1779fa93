// The gate: a service registered in place of one of ours, with the same
// methods, whose handlers run the real ones only when the interceptor's
// verdict for the call allows it. For a refused call the real handler is run
// with the refusal as its request status, so gRPC sends the refusal and the
// handler's own code never runs. A call without a verdict is refused
// (INTERNAL): the gate fails closed.
//
// Wrap() refuses a service with a method that has no rule in rules.h, or whose
// rule names another request type: a coordinator missing a rule does not start.
//
// Callback methods (grpc's callback API, named in `callback_methods`) are the
// one exception to "handlers contain no access checks": gRPC's callback
// handlers turn a failed request status into UNIMPLEMENTED, so the gate
// forwards them untouched and the method's first act is to ask
// AccessControl::Refusal and end the call with it (RunService.WatchRun does).
// The authorisation matrix test covers them like every other method.
//
// Thread safety: built once before the server starts; the handlers are
// called from gRPC's threads and keep no state of their own.
#ifndef SKERRY_SERVER_AUTH_GATE_H_
#define SKERRY_SERVER_AUTH_GATE_H_

#include <memory>
#include <set>
#include <string>
#include <vector>

#include "absl/status/statusor.h"
#include "google/protobuf/descriptor.h"
#include "grpcpp/impl/service_type.h"
#include "server/auth/access_control.h"

namespace skerry::auth {

class GatedService final : public grpc::Service {
 public:
  // `inner` (a generated synchronous service of ours, not registered with
  // the server itself) and `access` must outlive the gate.
  static absl::StatusOr<std::unique_ptr<GatedService>> Wrap(
      grpc::Service* inner, const std::string& service_full_name,
      const AccessControl* access,
      const std::set<std::string>& callback_methods = {});

 private:
  GatedService() = default;
  std::vector<std::unique_ptr<std::string>> names_;  // RpcMethod keeps char*
};

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_GATE_H_
