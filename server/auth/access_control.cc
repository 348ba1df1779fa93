#include "server/auth/access_control.h"

#include <cstdio>
#include <utility>

#include "absl/strings/ascii.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "common/quote.h"
#include "common/read_only.h"
#include "common/status_macros.h"
#include "server/api/grpc_status.h"
#include "server/api/request_bounds.h"
#include "server/auth/tokens.h"

namespace skerry::auth {
namespace {

constexpr size_t kMaxNoteBytes = 256;
constexpr size_t kMaxAuditMessageBytes = 512;

grpc::Status Unauthenticated(absl::string_view why) {
  return api::ToGrpc(absl::UnauthenticatedError(std::string(why)));
}

Caller FromRecord(const store::TokenRecord& t) {
  return Caller{t.principal, static_cast<Role>(t.role), t.id};
}

}  // namespace

absl::StatusOr<AuthMode> ParseAuthMode(absl::string_view text) {
  if (text == "auto") return AuthMode::kAuto;
  if (text == "on") return AuthMode::kOn;
  if (text == "off") return AuthMode::kOff;
  return absl::InvalidArgumentError(
      absl::StrCat("--auth: expected auto, on or off, got \"", text, "\""));
}

absl::StatusOr<std::unique_ptr<AccessControl>> AccessControl::Open(
    store::Store* store, Clock* clock, AuthMode mode, bool read_only) {
  SKERRY_ASSIGN_OR_RETURN(int64_t principals,
                          store->access().CountPrincipals());
  if (mode == AuthMode::kOn && principals == 0) {
    return absl::FailedPreconditionError(
        "--auth on: the database has no principal yet, so nobody could call "
        "anything; create the first admin with --init-admin NAME");
  }
  const bool enabled =
      mode == AuthMode::kOn || (mode == AuthMode::kAuto && principals > 0);
  std::unique_ptr<AccessControl> ac(
      new AccessControl(store, clock, enabled, read_only));
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::TokenRecord> tokens,
                          store->access().ListTokens());
  absl::MutexLock l(&ac->mu_);
  for (const store::TokenRecord& t : tokens) {
    if (!t.revoked_ms.has_value()) ac->live_[t.hash] = FromRecord(t);
  }
  return ac;
}

std::string AccessControl::Describe() const {
  absl::MutexLock l(&mu_);
  const char* read_only =
      read_only_ ? "; read-only (--read-only): every call that would change "
                   "the database is refused"
                 : "";
  if (!enabled_) {
    return absl::StrCat(
        "access control off: every caller acts as 'local' (admin); "
        "--init-admin NAME turns it on",
        read_only);
  }
  return absl::StrCat("access control on: ", live_.size(),
                      " live token(s); every call but the health check needs "
                      "one",
                      read_only);
}

absl::StatusOr<Caller> AccessControl::Authenticate(
    const std::vector<std::string>& authorization) const {
  if (authorization.empty()) {
    return absl::UnauthenticatedError(
        "no token: send the metadata 'authorization: Bearer TOKEN' (skerry "
        "reads it from --token, $SKERRY_TOKEN or ~/.config/skerry/token)");
  }
  if (authorization.size() > 1) {
    return absl::UnauthenticatedError(
        "more than one 'authorization' metadata entry");
  }
  absl::string_view value = authorization.front();
  constexpr absl::string_view kScheme = "bearer ";
  if (value.size() <= kScheme.size() ||
      !absl::EqualsIgnoreCase(value.substr(0, kScheme.size()), kScheme)) {
    return absl::UnauthenticatedError(
        "the 'authorization' metadata must be 'Bearer TOKEN'");
  }
  const std::string hash =
      HashToken(absl::StripAsciiWhitespace(value.substr(kScheme.size())));
  absl::MutexLock l(&mu_);
  auto it = live_.find(hash);
  if (it == live_.end()) {
    return absl::UnauthenticatedError(
        "token not accepted: unknown or revoked (ask an admin for a new one)");
  }
  return it->second;
}

Verdict AccessControl::Admit(
    absl::string_view method,
    const std::vector<std::string>& authorization) const {
  Verdict v;
  v.method = std::string(method);
  v.rule = FindRule(method);
  if (v.rule != nullptr && v.rule->permission == Permission::kPublic) {
    v.examined = true;
    return v;
  }
  if (!enabled_) {
    v.caller = Caller{kLocalPrincipal, skerry::v1::ROLE_ADMIN, 0};
  } else {
    absl::StatusOr<Caller> caller = Authenticate(authorization);
    if (!caller.ok()) {
      v.status = Unauthenticated(caller.status().message());
      return v;
    }
    v.caller = *caller;
  }
  if (v.rule == nullptr) {
    // Every method served has a rule (the gate will not serve one without),
    // so a method without one is not served: UNIMPLEMENTED, as gRPC itself
    // would answer.
    v.status = api::ToGrpc(absl::UnimplementedError(
        absl::StrCat("no method ", QuotePrefix(method),
                     " on this coordinator (see proto/skerry/v1/)")));
    return v;
  }
  if (enabled_ && !RoleAllows(v.rule->permission, v.caller->role)) {
    v.status = api::ToGrpc(absl::PermissionDeniedError(absl::StrCat(
        method, " needs ", NeededRoles(v.rule->permission), "; the token of ",
        v.caller->principal, " has role ", RoleName(v.caller->role))));
  }
  // Audited methods are the ones that change something; every fleet call
  // writes (a worker row, results, hand-backs).
  if (v.status.ok() && read_only_ &&
      (v.rule->audited || v.rule->permission == Permission::kFleet)) {
    v.status = api::ToGrpc(absl::FailedPreconditionError(
        absl::StrCat(kReadOnlyRefusal, ": ", method,
                     " would change the database; send it to the "
                     "coordinator that writes this database")));
  }
  return v;
}

void AccessControl::Examine(Verdict* v, const void* request,
                            const std::string& peer) {
  v->examined = true;
  if (request == nullptr && v->rule != nullptr && v->rule->request != nullptr &&
      v->status.ok()) {
    // gRPC's own answer would be INTERNAL with no message.
    v->status = api::ToGrpc(absl::InvalidArgumentError(absl::StrCat(
        "the request could not be decoded as ", v->rule->request->full_name(),
        " (not that message in protobuf wire format, or a "
        "string field that is not valid UTF-8)")));
  }
  if (request != nullptr && v->rule != nullptr && v->rule->message != nullptr &&
      v->status.ok()) {
    // Every string and list bounded before any handler sees the request.
    if (absl::Status s = api::CheckRequestBounds(*v->rule->message(request));
        !s.ok()) {
      v->status = api::ToGrpc(s);
    }
  }
  if (v->rule == nullptr || !v->caller.has_value()) return;
  if (request != nullptr && v->rule->run_id != nullptr) {
    v->run_id = static_cast<int64_t>(v->rule->run_id(request));
  }
  if (request != nullptr && v->run_id == 0 && v->rule->genome_id != nullptr) {
    const auto genome = static_cast<int64_t>(v->rule->genome_id(request));
    absl::StatusOr<store::GenomeRecord> g =
        genome == 0 ? absl::NotFoundError("no genome")
                    : store_->genomes().GetGenome(genome);
    // A missing genome leaves run 0: refused like a run of someone else's.
    if (g.ok()) v->run_id = g->run_id;
  }
  if (v->status.ok() && enabled_ &&
      v->rule->permission == Permission::kOwnRun &&
      v->caller->role != skerry::v1::ROLE_ADMIN) {
    // A missing run and someone else's run get the same answer.
    absl::StatusOr<std::optional<std::string>> owner =
        store_->access().RunOwner(v->run_id);
    if (!owner.ok()) {
      // The store's code says what to do (UNAVAILABLE: retry; DATA_LOSS: a
      // damaged database).
      v->status = api::ToGrpc(absl::Status(
          owner.status().code(), absl::StrCat("cannot check the run's owner: ",
                                              owner.status().message())));
    } else if (!owner->has_value() || **owner != v->caller->principal) {
      v->status = api::ToGrpc(absl::PermissionDeniedError(
          absl::StrCat(v->method, " on run ", v->run_id,
                       ": not a run of yours; a researcher may change only "
                       "the runs it submitted (role admin may change any)")));
    }
  }
  if (!v->rule->audited || read_only_) return;
  store::AuditRecord e;
  e.at_ms = clock_->WallMillis();
  e.principal = v->caller->principal;
  e.role = v->caller->role;
  e.token_id = v->caller->token_id;
  e.method = v->method;
  e.run_id = v->run_id;
  e.peer = peer;
  absl::StatusOr<int64_t> id = store_->access().BeginAudit(e);
  if (id.ok()) {
    v->audit_id = *id;
  } else if (v->status.ok()) {
    v->status = api::ToGrpc(absl::UnavailableError(
        absl::StrCat("the audit log cannot be written (", id.status().message(),
                     "); nothing was changed, try again")));
  }
}

void AccessControl::Conclude(const Verdict& v, const grpc::Status& sent) {
  if (v.audit_id == 0) return;
  store::AuditRecord e;
  e.id = v.audit_id;
  e.code = static_cast<int32_t>(sent.error_code());
  e.message = sent.error_message().substr(0, kMaxAuditMessageBytes);
  e.run_id = v.run_id;
  e.detail = v.detail;
  absl::Status s = store_->access().FinishAudit(e);
  if (!s.ok()) {
    std::fprintf(stderr,
                 "skerry-coordinator: audit entry %lld: outcome not written: "
                 "%s\n",
                 static_cast<long long>(v.audit_id),
                 std::string(s.message()).c_str());
  }
}

void AccessControl::Record(const grpc::ServerContextBase* ctx,
                           const Verdict& verdict) {
  absl::MutexLock l(&mu_);
  calls_[ctx] = verdict;
}

void AccessControl::Forget(const grpc::ServerContextBase* ctx) {
  absl::MutexLock l(&mu_);
  calls_.erase(ctx);
}

std::optional<Verdict> AccessControl::Find(
    const grpc::ServerContextBase* ctx) const {
  absl::MutexLock l(&mu_);
  auto it = calls_.find(ctx);
  if (it == calls_.end()) return std::nullopt;
  return it->second;
}

grpc::Status AccessControl::Refusal(const grpc::ServerContextBase* ctx,
                                    bool before_message) const {
  std::optional<Verdict> v = Find(ctx);
  if (!v.has_value()) {
    return api::ToGrpc(
        absl::InternalError("no access verdict for this call; refused"));
  }
  if (!v->status.ok()) return v->status;
  if (!v->examined && !before_message) {
    return api::ToGrpc(
        absl::InternalError("the request was not examined; refused"));
  }
  return grpc::Status::OK;
}

std::optional<Caller> AccessControl::CallerOf(
    const grpc::ServerContextBase* ctx) const {
  absl::MutexLock l(&mu_);
  auto it = calls_.find(ctx);
  if (it == calls_.end()) return std::nullopt;
  return it->second.caller;
}

void AccessControl::Note(const grpc::ServerContextBase* ctx, int64_t run_id,
                         std::string detail) {
  absl::MutexLock l(&mu_);
  auto it = calls_.find(ctx);
  if (it == calls_.end()) return;
  if (run_id != 0) it->second.run_id = run_id;
  it->second.detail = std::move(detail);
}

namespace {

absl::Status CheckNewToken(const std::string& principal, Role role,
                           const std::string& note) {
  SKERRY_RETURN_IF_ERROR(CheckPrincipalName(principal));
  if (RoleName(role) == "unknown") {
    return absl::InvalidArgumentError(
        "role: one of viewer, researcher, admin, worker is required");
  }
  if (note.size() > kMaxNoteBytes) {
    return absl::InvalidArgumentError(
        absl::StrCat("note: at most ", kMaxNoteBytes, " bytes"));
  }
  for (char c : note) {
    if (static_cast<unsigned char>(c) < 0x20 || c == 0x7f) {
      return absl::InvalidArgumentError("note: no control characters");
    }
  }
  return absl::OkStatus();
}

absl::StatusOr<AccessControl::IssuedToken> Issue(const std::string& principal,
                                                 Role role,
                                                 const std::string& note,
                                                 const std::string& by,
                                                 Clock* clock) {
  SKERRY_RETURN_IF_ERROR(CheckNewToken(principal, role, note));
  AccessControl::IssuedToken out;
  SKERRY_ASSIGN_OR_RETURN(out.secret, NewToken());
  out.record.principal = principal;
  out.record.role = role;
  out.record.hash = HashToken(out.secret);
  out.record.note = note;
  out.record.created_ms = clock->WallMillis();
  out.record.created_by = by;
  return out;
}

}  // namespace

absl::StatusOr<AccessControl::IssuedToken> AccessControl::CreateToken(
    const std::string& principal, Role role, const std::string& note,
    const std::string& by) {
  SKERRY_ASSIGN_OR_RETURN(IssuedToken t,
                          Issue(principal, role, note, by, clock_));
  if (role != skerry::v1::ROLE_ADMIN) {
    // The first principal turns access control on at the next start
    // (--auth auto): were it not an admin, nobody could then manage tokens.
    bool admin = false;
    {
      absl::MutexLock l(&mu_);
      for (const auto& [hash, caller] : live_) {
        admin = admin || caller.role == skerry::v1::ROLE_ADMIN;
      }
    }
    if (!admin) {
      return absl::FailedPreconditionError(absl::StrCat(
          "no admin has a live token yet, so a ", RoleName(role),
          " token would turn access control on at the next start with "
          "nobody able to manage it; create an admin token first (role "
          "admin, or skerry-coordinator --init-admin NAME)"));
    }
  }
  SKERRY_RETURN_IF_ERROR(store_->access().CreateToken(&t.record));
  absl::MutexLock l(&mu_);
  live_[t.record.hash] = FromRecord(t.record);
  return t;
}

absl::StatusOr<store::TokenRecord> AccessControl::RevokeToken(
    int64_t token_id, const std::string& by) {
  SKERRY_ASSIGN_OR_RETURN(
      store::TokenRecord t,
      store_->access().RevokeToken(token_id, by, clock_->WallMillis()));
  absl::MutexLock l(&mu_);
  live_.erase(t.hash);
  return t;
}

absl::StatusOr<AccessControl::IssuedToken> AccessControl::InitAdmin(
    store::Store* store, Clock* clock, const std::string& name) {
  SKERRY_ASSIGN_OR_RETURN(IssuedToken t,
                          Issue(name, skerry::v1::ROLE_ADMIN, "first admin",
                                "--init-admin", clock));
  SKERRY_RETURN_IF_ERROR(store->access().CreateFirstAdmin(&t.record));
  return t;
}

}  // namespace skerry::auth
