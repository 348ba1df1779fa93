// `skerry workers`: every worker the coordinator knows, seen last first: host,
// threads, evaluators, version, last seen, tasks in flight, evaluations per
// second and sandbox (AdminService.ListWorkers; a viewer's token is enough).
//
// Invariant: as for every command (cli/commands.h), failures are one line on
// io.err starting "skerry: " and an exit code.
// Thread safety: one command at a time per Io.
#ifndef SKERRY_CLI_WORKERS_H_
#define SKERRY_CLI_WORKERS_H_

#include <string>
#include <vector>

#include "absl/time/time.h"
#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/admin.grpc.pb.h"

namespace skerry::cli {

std::vector<CommandSpec> WorkersCommandSpecs();

// The table `skerry workers` prints.
std::string FormatWorkerList(const skerry::v1::ListWorkersResponse& workers,
                             absl::TimeZone zone);

int WorkersCommand(const ParsedArgs& args,
                   skerry::v1::AdminService::StubInterface& admin, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_WORKERS_H_
