// The access commands of `skerry`: `token create NAME --role ROLE`, `token
// list`, `token revoke ID`, `audit [--run N] [--principal NAME]` (for admins)
// and `whoami` (any token), over AccessService (proto/skerry/v1/access.proto).
//
// `token create` prints the new token alone on standard output (so it can be
// redirected into a file) and what it is on standard error. Nothing prints
// the caller's own token.
//
// Thread safety: one command at a time per Io.
#ifndef SKERRY_CLI_ACCESS_H_
#define SKERRY_CLI_ACCESS_H_

#include <string>
#include <vector>

#include "absl/strings/string_view.h"
#include "absl/time/time.h"
#include "cli/args.h"
#include "skerry/v1/access.grpc.pb.h"

namespace skerry::cli {

struct Io;

std::vector<CommandSpec> AccessCommandSpecs();

// Each runs its parsed command (`token`: its ACTION, looked up in a table of
// create, list and revoke); `target` names the coordinator in messages.
// Returns the exit code.
int TokenCommand(const ParsedArgs& args,
                 skerry::v1::AccessService::StubInterface& stub,
                 const std::string& target, Io& io);
int AuditCommand(const ParsedArgs& args,
                 skerry::v1::AccessService::StubInterface& stub,
                 const std::string& target, Io& io);
int WhoAmICommand(skerry::v1::AccessService::StubInterface& stub,
                  const std::string& target, Io& io);

// Table printers, for tests.
std::string FormatTokens(const std::vector<skerry::v1::TokenInfo>& tokens,
                         absl::TimeZone zone);
std::string FormatAudit(const std::vector<skerry::v1::AuditEntry>& entries,
                        absl::TimeZone zone);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_ACCESS_H_
