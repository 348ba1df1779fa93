#include "cli/access.h"

#include "absl/status/status.h"
#include "absl/strings/match.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/strip.h"
#include "absl/time/clock.h"
#include "cli/client.h"
#include "cli/commands.h"
#include "cli/format.h"
#include "cli/handlers.h"
#include "grpcpp/client_context.h"
#include "server/auth/roles.h"

namespace skerry::cli {
namespace {

constexpr absl::Duration kDeadline = absl::Seconds(30);

void SetDeadline(grpc::ClientContext* ctx) {
  ctx->set_deadline(absl::ToChronoTime(absl::Now() + CallDeadline(kDeadline)));
}

int Usage(const std::string& command, const std::string& what, Io& io) {
  *io.err << "skerry: " << command << ": " << what << "\n"
          << "run `skerry " << command << " --help` for its usage\n";
  return kExitUsage;
}

// "RunService/PauseRun" for "/skerry.v1.RunService/PauseRun".
std::string ShortMethod(const std::string& method) {
  absl::string_view m = method;
  absl::ConsumePrefix(&m, "/");
  absl::ConsumePrefix(&m, "skerry.v1.");
  return std::string(m);
}

std::string Outcome(const skerry::v1::AuditEntry& e) {
  if (!e.ended()) return "unfinished";
  if (e.code() == 0) return "done";
  return absl::StrCat("failed: ", absl::StatusCodeToString(
                                      static_cast<absl::StatusCode>(e.code())));
}

int TokenCreate(const ParsedArgs& args,
                skerry::v1::AccessService::StubInterface& stub,
                const std::string& target, Io& io) {
  if (args.positionals.size() < 2) {
    return Usage("token", "create needs the principal's NAME", io);
  }
  if (!args.Has("role")) {
    return Usage("token", "create needs --role viewer|researcher|admin|worker",
                 io);
  }
  absl::StatusOr<auth::Role> role = auth::ParseRole(args.Get("role"));
  if (!role.ok())
    return Usage("token", std::string(role.status().message()), io);
  skerry::v1::CreateTokenRequest req;
  req.set_principal(args.positionals[1]);
  req.set_role(*role);
  req.set_note(args.Get("note"));
  skerry::v1::CreateTokenResponse resp;
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  absl::Status s =
      FromGrpc(stub.CreateToken(&ctx, req, &resp), "CreateToken", target);
  if (!s.ok()) return ReportError(s, io);
  *io.err << "token " << resp.token().id() << " for "
          << resp.token().principal() << " ("
          << auth::RoleName(resp.token().role())
          << "); it follows, shown this once: the coordinator keeps only its "
             "hash\n";
  *io.out << resp.secret() << "\n" << std::flush;
  return kExitOk;
}

int TokenList(const ParsedArgs& args,
              skerry::v1::AccessService::StubInterface& stub,
              const std::string& target, Io& io) {
  skerry::v1::ListTokensRequest req;
  req.set_include_revoked(args.Has("all"));
  skerry::v1::ListTokensResponse resp;
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  absl::Status s =
      FromGrpc(stub.ListTokens(&ctx, req, &resp), "ListTokens", target);
  if (!s.ok()) return ReportError(s, io);
  *io.out << FormatTokens({resp.tokens().begin(), resp.tokens().end()},
                          io.zone);
  return kExitOk;
}

int TokenRevoke(const ParsedArgs& args,
                skerry::v1::AccessService::StubInterface& stub,
                const std::string& target, Io& io) {
  if (args.positionals.size() < 2) {
    return Usage("token",
                 "revoke needs a token ID as `skerry token list` shows it", io);
  }
  absl::StatusOr<uint32_t> id =
      ParseBoundedUint("token ID", args.positionals[1], 1, UINT32_MAX);
  if (!id.ok()) return Usage("token", std::string(id.status().message()), io);
  skerry::v1::RevokeTokenRequest req;
  req.set_token_id(*id);
  skerry::v1::RevokeTokenResponse resp;
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  absl::Status s =
      FromGrpc(stub.RevokeToken(&ctx, req, &resp), "RevokeToken", target);
  if (!s.ok()) return ReportError(s, io);
  *io.out << "token " << resp.token().id() << " of " << resp.token().principal()
          << " revoked\n";
  return kExitOk;
}

int Audit(const ParsedArgs& args,
          skerry::v1::AccessService::StubInterface& stub,
          const std::string& target, Io& io) {
  skerry::v1::QueryAuditRequest req;
  if (args.Has("run")) {
    absl::StatusOr<uint64_t> run = ParseRunId(args.Get("run"));
    if (!run.ok())
      return Usage("audit", std::string(run.status().message()), io);
    req.set_run_id(*run);
  }
  req.set_principal(args.Get("principal"));
  req.set_limit(50);
  if (args.Has("limit")) {
    absl::StatusOr<uint32_t> n =
        ParseBoundedUint("--limit", args.Get("limit"), 1, 10000);
    if (!n.ok()) return Usage("audit", std::string(n.status().message()), io);
    req.set_limit(*n);
  }
  skerry::v1::QueryAuditResponse resp;
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  absl::Status s =
      FromGrpc(stub.QueryAudit(&ctx, req, &resp), "QueryAudit", target);
  if (!s.ok()) return ReportError(s, io);
  *io.out << FormatAudit({resp.entries().begin(), resp.entries().end()},
                         io.zone);
  return kExitOk;
}

int WhoAmI(skerry::v1::AccessService::StubInterface& stub,
           const std::string& target, Io& io) {
  skerry::v1::WhoAmIResponse resp;
  grpc::ClientContext ctx;
  SetDeadline(&ctx);
  absl::Status s = FromGrpc(
      stub.WhoAmI(&ctx, skerry::v1::WhoAmIRequest(), &resp), "WhoAmI", target);
  if (!s.ok()) return ReportError(s, io);
  if (!resp.access_control()) {
    *io.out << "access control is off on " << target
            << ": every caller acts as " << resp.principal() << " ("
            << auth::RoleName(resp.role()) << ")\n";
  } else {
    *io.out << resp.principal() << " (" << auth::RoleName(resp.role())
            << "), token " << resp.token_id() << "\n";
  }
  return kExitOk;
}

}  // namespace

std::vector<CommandSpec> AccessCommandSpecs() {
  return {
      {"token",
       {"ACTION", "[ARG]"},
       {{"role", "ROLE", "with create: viewer, researcher, admin or worker"},
        {"note", "TEXT", "with create: a note that list shows"},
        {"all", nullptr, "with list: revoked tokens too"}},
       "manage bearer tokens (admin): create NAME --role ROLE, list, revoke ID",
       "ACTION is create, list or revoke. `token create NAME --role ROLE` "
       "makes "
       "a token for principal NAME (a person or a worker machine; created with "
       "its first token) and prints it on standard output, once: the "
       "coordinator keeps only its hash. `token list` shows the live tokens "
       "(--all: revoked ones too), never their text. `token revoke ID` ends a "
       "token at once. Needs a token of role admin.",
       TokenHandler},
      {"audit",
       {},
       {{"run", "N", "only entries about run N"},
        {"principal", "NAME", "only entries by NAME"},
        {"limit", "N", "at most N entries, newest first (default 50)"}},
       "show who changed what, when and from where (admin)",
       "Prints the audit log, newest first: every submit, pause, resume, stop, "
       "backup and token change, with who asked, when, from which address, "
       "and how it ended (refused calls by a known token included). Needs a "
       "token of role admin.",
       AuditHandler},
      {"whoami",
       {},
       {},
       "show whom the coordinator takes you to be",
       "Prints the principal and role of your token as the coordinator sees "
       "them, or says that access control is off. Any valid token may ask.",
       WhoAmIHandler},
  };
}

int TokenCommand(const ParsedArgs& args,
                 skerry::v1::AccessService::StubInterface& stub,
                 const std::string& target, Io& io) {
  using Action =
      int (*)(const ParsedArgs&, skerry::v1::AccessService::StubInterface&,
              const std::string&, Io&);
  static constexpr struct {
    const char* name;
    Action run;
  } kActions[] = {
      {"create", TokenCreate}, {"list", TokenList}, {"revoke", TokenRevoke}};
  const std::string& action = args.positionals[0];
  for (const auto& a : kActions) {
    if (action == a.name) return a.run(args, stub, target, io);
  }
  return Usage("token",
               absl::StrCat("unknown ACTION '", action,
                            "'; it is create, list or revoke"),
               io);
}

int AuditCommand(const ParsedArgs& args,
                 skerry::v1::AccessService::StubInterface& stub,
                 const std::string& target, Io& io) {
  return Audit(args, stub, target, io);
}

int WhoAmICommand(skerry::v1::AccessService::StubInterface& stub,
                  const std::string& target, Io& io) {
  return WhoAmI(stub, target, io);
}

std::string FormatTokens(const std::vector<skerry::v1::TokenInfo>& tokens,
                         absl::TimeZone zone) {
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::TokenInfo& t : tokens) {
    rows.push_back(
        {absl::StrCat(t.id()), t.principal(), auth::RoleName(t.role()),
         FormatTimestamp(t.created_unix_ms(), zone), t.created_by(),
         t.revoked_unix_ms() == 0
             ? "-"
             : absl::StrCat(FormatTimestamp(t.revoked_unix_ms(), zone), " by ",
                            t.revoked_by()),
         t.note()});
  }
  if (rows.empty()) return "no tokens\n";
  return FormatTable(
      {"ID", "PRINCIPAL", "ROLE", "CREATED", "BY", "REVOKED", "NOTE"}, rows,
      {0});
}

std::string FormatAudit(const std::vector<skerry::v1::AuditEntry>& entries,
                        absl::TimeZone zone) {
  std::vector<std::vector<std::string>> rows;
  for (const skerry::v1::AuditEntry& e : entries) {
    rows.push_back({absl::StrCat(e.id()), FormatTimestamp(e.unix_ms(), zone),
                    e.principal(), auth::RoleName(e.role()),
                    ShortMethod(e.method()),
                    e.run_id() == 0 ? "-" : absl::StrCat(e.run_id()),
                    Outcome(e), e.peer(), e.detail()});
  }
  if (rows.empty()) return "no audit entries\n";
  return FormatTable(
      {"ID", "WHEN", "WHO", "ROLE", "WHAT", "RUN", "OUTCOME", "FROM", "DETAIL"},
      rows, {0, 5});
}

}  // namespace skerry::cli
