// `skerry backup RUN|all --to FILE`: a consistent copy of the coordinator's
// database (or of one run), made while it runs and written to FILE on this
// machine. FILE is written under a temporary name and renamed when complete,
// so an interrupted backup never leaves a truncated FILE.
#ifndef SKERRY_CLI_BACKUP_H_
#define SKERRY_CLI_BACKUP_H_

#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/admin.grpc.pb.h"

namespace skerry::cli {

int BackupCommand(const ParsedArgs& args,
                  skerry::v1::AdminService::StubInterface& admin, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_BACKUP_H_
