// `skerry fork RUN --at GENERATION [--set TEXT] [--set-file FILE]`: a new run
// that starts from run RUN's populations at GENERATION, with the changes to
// its spec given in protobuf text format (RunService.ForkRun). Prints the new
// run's id, as `submit` does.
//
// Thread safety: as every command (cli/commands.h).
#ifndef SKERRY_CLI_FORK_H_
#define SKERRY_CLI_FORK_H_

#include <cstdint>

#include "cli/args.h"
#include "cli/client.h"
#include "cli/commands.h"

namespace skerry::cli {

// Exit codes of cli/commands.h; `*fork_id` is the new run's id on success.
int ForkCommand(const ParsedArgs& args, RunClient& client, uint64_t run_id,
                Io& io, uint64_t* fork_id);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_FORK_H_
