// AccessService (proto/skerry/v1/access.proto): tokens and the audit log, for
// admins; WhoAmI for any valid token. Who may call which method is decided
// before a handler runs (server/auth/rules.h); the handlers check the input and
// note for the audit log what they changed.
//
// Thread safety: gRPC calls the handlers from many threads; the service holds
// no state of its own.
#ifndef SKERRY_SERVER_API_ACCESS_SERVICE_H_
#define SKERRY_SERVER_API_ACCESS_SERVICE_H_

#include "server/auth/access_control.h"
#include "server/store/store.h"
#include "skerry/v1/access.grpc.pb.h"

namespace skerry::api {

// The API's view of a stored token (never its hash).
skerry::v1::TokenInfo ToTokenInfo(const store::TokenRecord& t);

class AccessServiceImpl final : public skerry::v1::AccessService::Service {
 public:
  static constexpr uint32_t kMaxAuditEntries = 10000;

  AccessServiceImpl(store::Store* store, auth::AccessControl* access)
      : store_(store), access_(access) {}

  grpc::Status CreateToken(grpc::ServerContext* ctx,
                           const skerry::v1::CreateTokenRequest* req,
                           skerry::v1::CreateTokenResponse* resp) override;
  grpc::Status ListTokens(grpc::ServerContext* ctx,
                          const skerry::v1::ListTokensRequest* req,
                          skerry::v1::ListTokensResponse* resp) override;
  grpc::Status RevokeToken(grpc::ServerContext* ctx,
                           const skerry::v1::RevokeTokenRequest* req,
                           skerry::v1::RevokeTokenResponse* resp) override;
  grpc::Status QueryAudit(grpc::ServerContext* ctx,
                          const skerry::v1::QueryAuditRequest* req,
                          skerry::v1::QueryAuditResponse* resp) override;
  grpc::Status WhoAmI(grpc::ServerContext* ctx,
                      const skerry::v1::WhoAmIRequest* req,
                      skerry::v1::WhoAmIResponse* resp) override;

 private:
  std::string CallerName(const grpc::ServerContext* ctx) const;

  store::Store* const store_;
  auth::AccessControl* const access_;
};

}  // namespace skerry::api

#endif  // SKERRY_SERVER_API_ACCESS_SERVICE_H_
