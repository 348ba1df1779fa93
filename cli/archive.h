// `skerry archive RUN --to FILE`: the run exported to FILE on this machine,
// then deleted from the coordinator, and `skerry import FILE`: the runs of
// such a file (or of `skerry backup`) imported into a running coordinator.
//
// Archive deletes nothing until FILE is whole: the export is written under a
// temporary name, synced, read back and its SHA-256 checked against the
// coordinator's, then renamed to FILE; only then does the second call ask
// the coordinator to delete the run, which it does only while the run's rows
// still have the content digest of the export (RunService.ArchiveRun).
//
// Thread safety: functions, called from the CLI's one thread.
#ifndef SKERRY_CLI_ARCHIVE_H_
#define SKERRY_CLI_ARCHIVE_H_

#include <cstdint>

#include "cli/args.h"
#include "cli/commands.h"
#include "skerry/v1/runs.grpc.pb.h"

namespace skerry::cli {

// The most `skerry import` sends (RunService.ImportRuns' bound).
inline constexpr uint64_t kMaxImportBytes = 64ull << 20;

int ArchiveCommand(const ParsedArgs& args,
                   skerry::v1::RunService::StubInterface& runs, Io& io);
int ImportCommand(const ParsedArgs& args,
                  skerry::v1::RunService::StubInterface& runs, Io& io);

}  // namespace skerry::cli

#endif  // SKERRY_CLI_ARCHIVE_H_
