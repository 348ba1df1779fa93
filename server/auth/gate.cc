#include "server/auth/gate.h"

#include "absl/strings/str_cat.h"
#include "grpcpp/impl/rpc_service_method.h"

namespace skerry::auth {
namespace {

using grpc::internal::MethodHandler;

// grpc::Service::GetHandler is protected; this names it through a subclass
// to read the generated handlers of another service.
struct HandlerOf : grpc::Service {
  static MethodHandler* Get(grpc::Service* service, int index) {
    return (service->*&HandlerOf::GetHandler)(index);
  }
};

class GateHandler final : public MethodHandler {
 public:
  GateHandler(MethodHandler* inner, const Rule* rule,
              const AccessControl* access)
      : inner_(inner), rule_(rule), access_(access) {}

  void RunHandler(const HandlerParameter& p) override {
    const grpc::Status refusal = access_->Refusal(p.server_context);
    if (refusal.ok()) {
      inner_->RunHandler(p);
      return;
    }
    // The generated handler skips the service's code for a failed request
    // status and destroys nothing then: destroy the request here.
    if (p.request != nullptr && p.status.ok()) rule_->destroy(p.request);
    inner_->RunHandler(HandlerParameter(p.call, p.server_context, nullptr,
                                        refusal, p.internal_data,
                                        p.call_requester));
  }

  void* Deserialize(grpc_call* call, grpc_byte_buffer* req,
                    grpc::Status* status, void** handler_data) override {
    return inner_->Deserialize(call, req, status, handler_data);
  }

 private:
  MethodHandler* const inner_;
  const Rule* const rule_;
  const AccessControl* const access_;
};

// A callback method's handler, not owned: a refusal cannot be passed to it
// as a request status (gRPC would answer UNIMPLEMENTED), so the method itself
// asks AccessControl::Refusal first (see gate.h).
class CallbackForward final : public MethodHandler {
 public:
  explicit CallbackForward(MethodHandler* inner) : inner_(inner) {}
  void RunHandler(const HandlerParameter& p) override { inner_->RunHandler(p); }
  void* Deserialize(grpc_call* call, grpc_byte_buffer* req,
                    grpc::Status* status, void** handler_data) override {
    return inner_->Deserialize(call, req, status, handler_data);
  }

 private:
  MethodHandler* const inner_;
};

}  // namespace

absl::StatusOr<std::unique_ptr<GatedService>> GatedService::Wrap(
    grpc::Service* inner, const std::string& service_full_name,
    const AccessControl* access,
    const std::set<std::string>& callback_methods) {
  const google::protobuf::ServiceDescriptor* d =
      google::protobuf::DescriptorPool::generated_pool()->FindServiceByName(
          service_full_name);
  if (d == nullptr) {
    return absl::InternalError(
        absl::StrCat("no descriptor for service ", service_full_name));
  }
  std::unique_ptr<GatedService> gate(new GatedService());
  for (int i = 0; i < d->method_count(); ++i) {
    const google::protobuf::MethodDescriptor* m = d->method(i);
    auto name = std::make_unique<std::string>(
        absl::StrCat("/", d->full_name(), "/", m->name()));
    const Rule* rule = FindRule(*name);
    if (rule == nullptr) {
      return absl::FailedPreconditionError(absl::StrCat(
          *name,
          " has no access rule in server/auth/rules.cc; refusing to "
          "serve it"));
    }
    if (rule->request != m->input_type()) {
      return absl::FailedPreconditionError(absl::StrCat(
          "the access rule for ", *name, " names request type ",
          rule->request == nullptr ? "none" : rule->request->full_name(),
          " but the method takes ", m->input_type()->full_name()));
    }
    MethodHandler* handler = HandlerOf::Get(inner, i);
    if (handler == nullptr) {
      return absl::InternalError(
          absl::StrCat(*name, ": not a synchronous method"));
    }
    const auto type = m->client_streaming()
                          ? (m->server_streaming()
                                 ? grpc::internal::RpcMethod::BIDI_STREAMING
                                 : grpc::internal::RpcMethod::CLIENT_STREAMING)
                          : (m->server_streaming()
                                 ? grpc::internal::RpcMethod::SERVER_STREAMING
                                 : grpc::internal::RpcMethod::NORMAL_RPC);
    if (callback_methods.count(m->name()) > 0) {
      gate->AddMethod(new grpc::internal::RpcServiceMethod(
          name->c_str(), type, new CallbackForward(handler)));
      gate->MarkMethodCallback(i, new CallbackForward(handler));
    } else {
      gate->AddMethod(new grpc::internal::RpcServiceMethod(
          name->c_str(), type, new GateHandler(handler, rule, access)));
    }
    gate->names_.push_back(std::move(name));
  }
  return gate;
}

}  // namespace skerry::auth
