#include "cli/backup.h"

#include <cstdio>
#include <string>

#include "absl/strings/str_cat.h"
#include "cli/format.h"
#include "grpcpp/grpcpp.h"

namespace skerry::cli {

int BackupCommand(const ParsedArgs& args,
                  skerry::v1::AdminService::StubInterface& admin, Io& io) {
  const std::string& which = args.positionals[0];
  uint64_t run_id = 0;
  if (which != "all") {
    absl::StatusOr<uint64_t> id = ParseRunId(which);
    if (!id.ok()) {
      *io.err << "skerry: backup: " << id.status().message()
              << " (or \"all\" for the whole database)\n";
      return kExitUsage;
    }
    run_id = *id;
  }
  const std::string target = args.Get("to");
  const std::string partial = target + ".partial";
  if (std::FILE* existing = std::fopen(target.c_str(), "rb")) {
    std::fclose(existing);
    *io.err << "skerry: backup: " << target
            << " already exists; choose another file\n";
    return kExitUsage;
  }
  std::FILE* out = std::fopen(partial.c_str(), "wb");
  if (out == nullptr) {
    *io.err << "skerry: backup: cannot write " << partial << "\n";
    return kExitFailure;
  }
  skerry::v1::BackupRequest req;
  req.set_run_id(run_id);
  grpc::ClientContext ctx;
  std::unique_ptr<grpc::ClientReaderInterface<skerry::v1::BackupChunk>> reader =
      admin.Backup(&ctx, req);
  skerry::v1::BackupChunk chunk;
  uint64_t written = 0;
  bool write_failed = false;
  while (reader->Read(&chunk)) {
    if (std::fwrite(chunk.data().data(), 1, chunk.data().size(), out) !=
        chunk.data().size()) {
      write_failed = true;
      ctx.TryCancel();
      break;
    }
    written += chunk.data().size();
  }
  const grpc::Status status = reader->Finish();
  const bool closed = std::fclose(out) == 0;
  if (write_failed || !closed) {
    std::remove(partial.c_str());
    *io.err << "skerry: backup: writing " << partial
            << " failed (disk full?); nothing kept\n";
    return kExitFailure;
  }
  if (!status.ok()) {
    std::remove(partial.c_str());
    *io.err << "skerry: backup: " << status.error_message() << "\n";
    return status.error_code() == grpc::StatusCode::UNAVAILABLE
               ? kExitUnreachable
               : kExitFailure;
  }
  if (std::rename(partial.c_str(), target.c_str()) != 0) {
    *io.err << "skerry: backup: cannot rename " << partial << " to " << target
            << "\n";
    return kExitFailure;
  }
  *io.out << "backup of "
          << (run_id == 0 ? std::string("the whole database")
                          : absl::StrCat("run ", run_id))
          << " written to " << target << " (" << FormatCount(written)
          << " bytes)\n"
          << "restore: skerry-coordinator --db " << target << "\n";
  return kExitOk;
}

}  // namespace skerry::cli
