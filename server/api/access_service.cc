#include "server/api/access_service.h"

#include "absl/strings/str_cat.h"
#include "server/api/grpc_status.h"

namespace skerry::api {

skerry::v1::TokenInfo ToTokenInfo(const store::TokenRecord& t) {
  skerry::v1::TokenInfo out;
  out.set_id(static_cast<uint64_t>(t.id));
  out.set_principal(t.principal);
  out.set_role(static_cast<skerry::v1::Role>(t.role));
  out.set_note(t.note);
  out.set_created_unix_ms(t.created_ms);
  out.set_created_by(t.created_by);
  out.set_revoked_unix_ms(t.revoked_ms.value_or(0));
  out.set_revoked_by(t.revoked_by);
  return out;
}

std::string AccessServiceImpl::CallerName(
    const grpc::ServerContext* ctx) const {
  std::optional<auth::Caller> caller = access_->CallerOf(ctx);
  return caller.has_value() ? caller->principal : auth::kLocalPrincipal;
}

grpc::Status AccessServiceImpl::CreateToken(
    grpc::ServerContext* ctx, const skerry::v1::CreateTokenRequest* req,
    skerry::v1::CreateTokenResponse* resp) {
  absl::StatusOr<auth::AccessControl::IssuedToken> t = access_->CreateToken(
      req->principal(), req->role(), req->note(), CallerName(ctx));
  if (!t.ok()) return ToGrpc(t.status());
  access_->Note(ctx, 0,
                absl::StrCat("token ", t->record.id, " for ", req->principal(),
                             " as ", auth::RoleName(req->role())));
  *resp->mutable_token() = ToTokenInfo(t->record);
  resp->set_secret(t->secret);
  return grpc::Status::OK;
}

grpc::Status AccessServiceImpl::ListTokens(
    grpc::ServerContext* ctx, const skerry::v1::ListTokensRequest* req,
    skerry::v1::ListTokensResponse* resp) {
  absl::StatusOr<std::vector<store::TokenRecord>> all =
      store_->access().ListTokens();
  if (!all.ok()) return ToGrpc(all.status());
  for (const store::TokenRecord& t : *all) {
    if (t.revoked_ms.has_value() && !req->include_revoked()) continue;
    *resp->add_tokens() = ToTokenInfo(t);
  }
  return grpc::Status::OK;
}

grpc::Status AccessServiceImpl::RevokeToken(
    grpc::ServerContext* ctx, const skerry::v1::RevokeTokenRequest* req,
    skerry::v1::RevokeTokenResponse* resp) {
  if (req->token_id() == 0 ||
      req->token_id() > static_cast<uint64_t>(INT64_MAX)) {
    return ToGrpc(absl::InvalidArgumentError(
        "token_id: a token id as ListTokens shows it"));
  }
  absl::StatusOr<store::TokenRecord> t = access_->RevokeToken(
      static_cast<int64_t>(req->token_id()), CallerName(ctx));
  if (!t.ok()) return ToGrpc(t.status());
  access_->Note(
      ctx, 0,
      absl::StrCat("token ", t->id, " of ", t->principal, " (",
                   auth::RoleName(static_cast<auth::Role>(t->role)), ")"));
  *resp->mutable_token() = ToTokenInfo(*t);
  return grpc::Status::OK;
}

grpc::Status AccessServiceImpl::QueryAudit(
    grpc::ServerContext* ctx, const skerry::v1::QueryAuditRequest* req,
    skerry::v1::QueryAuditResponse* resp) {
  if (req->limit() > kMaxAuditEntries) {
    return ToGrpc(absl::InvalidArgumentError(
        absl::StrCat("limit: at most ", kMaxAuditEntries)));
  }
  if (req->run_id() > static_cast<uint64_t>(INT64_MAX) ||
      req->before_id() > static_cast<uint64_t>(INT64_MAX)) {
    return ToGrpc(
        absl::InvalidArgumentError("run_id and before_id must fit in 63 bits"));
  }
  store::AuditQuery q;
  q.run_id = static_cast<int64_t>(req->run_id());
  q.principal = req->principal();
  q.before_id = static_cast<int64_t>(req->before_id());
  q.limit = req->limit() == 0 ? 100 : static_cast<int>(req->limit());
  absl::StatusOr<std::vector<store::AuditRecord>> rows =
      store_->access().QueryAudit(q);
  if (!rows.ok()) return ToGrpc(rows.status());
  for (const store::AuditRecord& r : *rows) {
    skerry::v1::AuditEntry* e = resp->add_entries();
    e->set_id(static_cast<uint64_t>(r.id));
    e->set_unix_ms(r.at_ms);
    e->set_principal(r.principal);
    e->set_role(static_cast<skerry::v1::Role>(r.role));
    e->set_token_id(static_cast<uint64_t>(r.token_id));
    e->set_method(r.method);
    e->set_run_id(static_cast<uint64_t>(r.run_id));
    e->set_peer(r.peer);
    e->set_ended(r.code.has_value());
    e->set_code(static_cast<uint32_t>(r.code.value_or(0)));
    e->set_message(r.message);
    e->set_detail(r.detail);
  }
  return grpc::Status::OK;
}

grpc::Status AccessServiceImpl::WhoAmI(grpc::ServerContext* ctx,
                                       const skerry::v1::WhoAmIRequest* req,
                                       skerry::v1::WhoAmIResponse* resp) {
  std::optional<auth::Caller> caller = access_->CallerOf(ctx);
  if (caller.has_value()) {
    resp->set_principal(caller->principal);
    resp->set_role(caller->role);
    resp->set_token_id(static_cast<uint64_t>(caller->token_id));
  }
  resp->set_access_control(access_->enabled());
  return grpc::Status::OK;
}

}  // namespace skerry::api
