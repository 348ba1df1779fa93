#include "cli/housekeeping.h"

#include "cli/format.h"

namespace skerry::cli {

int DeleteCommand(RunClient& client, uint64_t run_id, Io& io) {
  absl::StatusOr<skerry::v1::DeleteRunResponse> deleted = client.Delete(run_id);
  if (!deleted.ok()) return ReportError(deleted.status(), io);
  *io.out << "run " << deleted->run_id() << " deleted ("
          << FormatCount(deleted->genomes()) << " genomes; "
          << FormatCount(deleted->bytes_freed())
          << " bytes given back to the file system)\n";
  return kExitOk;
}

}  // namespace skerry::cli
