// `skerry delete RUN --yes`: an ended run's rows go from the coordinator's
// database (RunService.DeleteRun). Export is `skerry backup RUN --to FILE`
// (cli/backup.h).
//
// Thread safety: as every command (cli/commands.h).
#ifndef SKERRY_CLI_HOUSEKEEPING_H_
#define SKERRY_CLI_HOUSEKEEPING_H_

#include <cstdint>

#include "cli/client.h"
#include "cli/commands.h"

namespace skerry::cli {

// Exit codes of cli/commands.h. The parser has already required --yes.
int DeleteCommand(RunClient& client, uint64_t run_id, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_HOUSEKEEPING_H_
