// The server interceptor that checks every call (the only one the coordinator
// installs). For each call it asks AccessControl for a verdict as soon as the
// request metadata and the request have arrived (token, role, run owner, audit
// row), records it for the gate and the handlers, and when the call ends makes
// the status sent the refusal (for a refused call) and writes the outcome of an
// audited one.
//
// gRPC's C++ server interceptors cannot stop a call from reaching its handler
// (they cannot hijack; grpc/grpc issue 24017), so the refusal itself is carried
// out by the gate (gate.h), which every service is registered behind.
//
// Thread safety: gRPC creates one interceptor per call and runs it on the
// call's threads; the factory is shared and stateless.
#ifndef SKERRY_SERVER_AUTH_INTERCEPTOR_H_
#define SKERRY_SERVER_AUTH_INTERCEPTOR_H_

#include "grpcpp/support/server_interceptor.h"
#include "server/auth/access_control.h"

namespace skerry::auth {

class AuthInterceptorFactory final
    : public grpc::experimental::ServerInterceptorFactoryInterface {
 public:
  explicit AuthInterceptorFactory(AccessControl* access) : access_(access) {}
  grpc::experimental::Interceptor* CreateServerInterceptor(
      grpc::experimental::ServerRpcInfo* info) override;

 private:
  AccessControl* const access_;
};

}  // namespace skerry::auth

#endif  // SKERRY_SERVER_AUTH_INTERCEPTOR_H_
