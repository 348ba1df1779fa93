// Helpers for the end-to-end tests of access control: the first admin made by
// the real `skerry-coordinator --init-admin`, further tokens through
// AccessService, and calls that carry a token.
//
// Thread safety: used from the test's thread.
#ifndef SKERRY_TESTS_E2E_ACCESS_FIXTURE_H_
#define SKERRY_TESTS_E2E_ACCESS_FIXTURE_H_

#include <chrono>
#include <memory>
#include <string>

#include "absl/status/statusor.h"
#include "absl/strings/str_cat.h"
#include "grpcpp/grpcpp.h"
#include "skerry/v1/access.grpc.pb.h"
#include "tests/support/process.h"

namespace skerry::testing {

// The first "skt_" + 64 hex digits in `text`, or "".
inline std::string TokenIn(const std::string& text) {
  for (size_t at = text.find("skt_"); at != std::string::npos;
       at = text.find("skt_", at + 1)) {
    size_t end = at + 4;
    while (end < text.size() && ((text[end] >= '0' && text[end] <= '9') ||
                                 (text[end] >= 'a' && text[end] <= 'f'))) {
      ++end;
    }
    if (end - at == 68) return text.substr(at, 68);
  }
  return "";
}

// `skerry-coordinator --db DB --init-admin NAME`; its token.
inline absl::StatusOr<std::string> InitAdmin(const std::string& binary,
                                             const std::string& db,
                                             const std::string& name) {
  CommandResult r = RunCommand({binary, "--db", db, "--init-admin", name});
  const std::string token = TokenIn(r.output);
  if (r.exit_code != 0 || token.empty()) {
    return absl::InternalError(absl::StrCat("--init-admin failed (exit ",
                                            r.exit_code, "): ", r.output));
  }
  return token;
}

inline void Authorize(grpc::ClientContext* ctx, const std::string& token) {
  ctx->set_deadline(std::chrono::system_clock::now() +
                    std::chrono::seconds(10));
  if (!token.empty()) ctx->AddMetadata("authorization", "Bearer " + token);
}

// A new token for `principal` with `role`, made by the admin `admin_token`.
inline absl::StatusOr<skerry::v1::CreateTokenResponse> CreateToken(
    skerry::v1::AccessService::StubInterface& access,
    const std::string& admin_token, const std::string& principal,
    skerry::v1::Role role) {
  grpc::ClientContext ctx;
  Authorize(&ctx, admin_token);
  skerry::v1::CreateTokenRequest req;
  req.set_principal(principal);
  req.set_role(role);
  skerry::v1::CreateTokenResponse resp;
  grpc::Status s = access.CreateToken(&ctx, req, &resp);
  if (!s.ok()) {
    return absl::InternalError(
        absl::StrCat("CreateToken: ", s.error_message()));
  }
  return resp;
}

}  // namespace skerry::testing

#endif  // SKERRY_TESTS_E2E_ACCESS_FIXTURE_H_
