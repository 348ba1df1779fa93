#include "server/auth/interceptor.h"

#include <string>
#include <vector>

namespace skerry::auth {
namespace {

using grpc::experimental::InterceptionHookPoints;

class AuthInterceptor final : public grpc::experimental::Interceptor {
 public:
  AuthInterceptor(AccessControl* access,
                  grpc::experimental::ServerRpcInfo* info)
      : access_(access), info_(info) {}
  // The call has ended: its verdict goes with it.
  ~AuthInterceptor() override {
    if (recorded_) access_->Forget(info_->server_context());
  }

  void Intercept(grpc::experimental::InterceptorBatchMethods* m) override {
    const bool got_metadata = m->QueryInterceptionHookPoint(
        InterceptionHookPoints::POST_RECV_INITIAL_METADATA);
    const bool got_message = m->QueryInterceptionHookPoint(
        InterceptionHookPoints::POST_RECV_MESSAGE);
    if (got_metadata) {
      std::vector<std::string> authorization;
      auto range = m->GetRecvInitialMetadata()->equal_range("authorization");
      for (auto it = range.first; it != range.second; ++it) {
        authorization.emplace_back(it->second.data(), it->second.size());
      }
      verdict_ = access_->Admit(info_->method(), authorization);
      admitted_ = true;
    }
    if (got_message && admitted_ && !verdict_.examined) {
      access_->Examine(&verdict_, m->GetRecvMessage(),
                       info_->server_context()->peer());
    }
    if ((got_metadata || got_message) && admitted_) {
      access_->Record(info_->server_context(), verdict_);
      recorded_ = true;
    }
    if (m->QueryInterceptionHookPoint(
            InterceptionHookPoints::PRE_SEND_STATUS) &&
        recorded_) {
      // The recorded verdict holds what the handler noted for the audit log.
      std::optional<Verdict> v = access_->Find(info_->server_context());
      if (v.has_value()) {
        grpc::Status sent = m->GetSendStatus();
        if (!v->status.ok()) {
          m->ModifySendStatus(v->status);
          sent = v->status;
        }
        access_->Conclude(*v, sent);
      }
    }
    m->Proceed();
  }

 private:
  AccessControl* const access_;
  grpc::experimental::ServerRpcInfo* const info_;
  Verdict verdict_;
  bool admitted_ = false;
  bool recorded_ = false;
};

}  // namespace

grpc::experimental::Interceptor*
AuthInterceptorFactory::CreateServerInterceptor(
    grpc::experimental::ServerRpcInfo* info) {
  return new AuthInterceptor(access_, info);
}

}  // namespace skerry::auth
