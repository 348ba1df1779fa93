#include "cli/archive.h"

#include <fcntl.h>
#include <unistd.h>

#include <chrono>
#include <cstdio>
#include <fstream>
#include <iterator>
#include <string>

#include "absl/strings/str_cat.h"
#include "cli/format.h"
#include "common/sha256.h"
#include "grpcpp/grpcpp.h"

namespace skerry::cli {
namespace {

int ExitFor(const grpc::Status& s) {
  return s.error_code() == grpc::StatusCode::UNAVAILABLE ? kExitUnreachable
                                                         : kExitFailure;
}

// SHA-256 of the file as it reads back from disk; "" when it cannot be read.
std::string FileSha256(const std::string& path) {
  std::FILE* f = std::fopen(path.c_str(), "rb");
  if (f == nullptr) return "";
  Sha256 h;
  char buf[1 << 16];
  size_t n = 0;
  while ((n = std::fread(buf, 1, sizeof buf, f)) > 0) {
    h.Update(absl::string_view(buf, n));
  }
  const bool failed = std::ferror(f) != 0;
  std::fclose(f);
  return failed ? "" : h.FinishHex();
}

}  // namespace

int ArchiveCommand(const ParsedArgs& args,
                   skerry::v1::RunService::StubInterface& runs, Io& io) {
  absl::StatusOr<uint64_t> run_id = ParseRunId(args.positionals[0]);
  if (!run_id.ok()) {
    *io.err << "skerry: archive: " << run_id.status().message() << "\n";
    return kExitUsage;
  }
  const std::string target = args.Get("to");
  const std::string partial = target + ".partial";
  if (access(target.c_str(), F_OK) == 0) {
    *io.err << "skerry: archive: " << target
            << " already exists; choose another file\n";
    return kExitUsage;
  }
  std::FILE* out = std::fopen(partial.c_str(), "wb");
  if (out == nullptr) {
    *io.err << "skerry: archive: cannot write " << partial
            << "; nothing deleted\n";
    return kExitFailure;
  }
  skerry::v1::ArchiveRunRequest req;
  req.set_run_id(*run_id);
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::hours(1));
  auto reader = runs.ArchiveRun(&ctx, req);
  skerry::v1::ArchiveChunk chunk;
  std::string file_sha;
  std::string content;
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
    if (!chunk.file_sha256().empty()) file_sha = chunk.file_sha256();
    if (!chunk.content_digest().empty()) content = chunk.content_digest();
  }
  const grpc::Status status = reader->Finish();
  const bool synced = std::fflush(out) == 0 && fsync(fileno(out)) == 0;
  const bool closed = std::fclose(out) == 0;
  if (write_failed || !synced || !closed) {
    std::remove(partial.c_str());
    *io.err << "skerry: archive: writing " << partial
            << " failed (disk full?); nothing kept, nothing deleted\n";
    return kExitFailure;
  }
  if (!status.ok()) {
    std::remove(partial.c_str());
    *io.err << "skerry: archive: " << status.error_message()
            << "; nothing deleted\n";
    return ExitFor(status);
  }
  const std::string read_back = FileSha256(partial);
  if (file_sha.empty() || content.empty() || read_back != file_sha) {
    std::remove(partial.c_str());
    *io.err << "skerry: archive: " << partial
            << " does not read back as the coordinator sent it (SHA-256 "
            << (read_back.empty() ? "unreadable" : read_back) << ", sent "
            << (file_sha.empty() ? "none" : file_sha)
            << "); nothing kept, nothing deleted\n";
    return kExitFailure;
  }
  if (std::rename(partial.c_str(), target.c_str()) != 0) {
    *io.err << "skerry: archive: cannot rename " << partial << " to " << target
            << "; nothing deleted\n";
    return kExitFailure;
  }
  const size_t slash = target.rfind('/');
  const std::string folder = slash == std::string::npos ? std::string(".")
                             : slash == 0               ? std::string("/")
                                          : target.substr(0, slash);
  if (int dir = open(folder.c_str(), O_RDONLY); dir >= 0) {
    fsync(dir);  // best effort: the rename itself, for a crash right after
    close(dir);
  }

  skerry::v1::ArchiveRunRequest confirm;
  confirm.set_run_id(*run_id);
  confirm.set_confirm_content(content);
  confirm.set_confirm_file_sha256(file_sha);
  grpc::ClientContext ctx2;
  ctx2.set_deadline(std::chrono::system_clock::now() +
                    std::chrono::minutes(10));
  auto deleter = runs.ArchiveRun(&ctx2, confirm);
  skerry::v1::ArchiveChunk answer;
  bool answered = false;
  while (deleter->Read(&answer)) answered = answered || answer.has_deleted();
  const grpc::Status deleted = deleter->Finish();
  if (!deleted.ok() || !answered) {
    *io.err << "skerry: archive: run " << *run_id << " written to " << target
            << " (" << FormatCount(written) << " bytes) but not deleted: "
            << (deleted.ok() ? std::string("no answer")
                             : deleted.error_message())
            << "\n";
    return deleted.ok() ? kExitFailure : ExitFor(deleted);
  }
  *io.out << "run " << *run_id << " archived to " << target << " ("
          << FormatCount(written) << " bytes, SHA-256 " << file_sha << "); "
          << FormatCount(answer.deleted().genomes())
          << " genomes deleted from the coordinator, "
          << FormatCount(answer.deleted().bytes_freed())
          << " bytes given back\n"
          << "bring it back: skerry import " << target << "\n";
  return kExitOk;
}

int ImportCommand(const ParsedArgs& args,
                  skerry::v1::RunService::StubInterface& runs, Io& io) {
  const std::string& path = args.positionals[0];
  std::ifstream in(path, std::ios::binary);
  if (!in) {
    *io.err << "skerry: import: cannot read " << path << "\n";
    return kExitUsage;
  }
  in.seekg(0, std::ios::end);
  const std::streamoff size = in.tellg();
  if (size < 0 || static_cast<uint64_t>(size) > kMaxImportBytes) {
    *io.err << "skerry: import: " << path << " holds " << size
            << " bytes, more than the " << kMaxImportBytes
            << " a running coordinator takes; import it offline "
               "(skerry-coordinator --db DB --import "
            << path << ")\n";
    return kExitUsage;
  }
  in.seekg(0, std::ios::beg);
  skerry::v1::ImportRunsRequest req;
  req.mutable_file()->assign(std::istreambuf_iterator<char>(in),
                             std::istreambuf_iterator<char>());
  if (!in.good() && !in.eof()) {
    *io.err << "skerry: import: cannot read " << path << "\n";
    return kExitFailure;
  }
  grpc::ClientContext ctx;
  ctx.set_deadline(std::chrono::system_clock::now() + std::chrono::minutes(10));
  skerry::v1::ImportRunsResponse resp;
  const grpc::Status status = runs.ImportRuns(&ctx, req, &resp);
  if (!status.ok()) {
    *io.err << "skerry: import: " << path << ": " << status.error_message()
            << "\n";
    return ExitFor(status);
  }
  *io.out << "imported ";
  if (resp.runs_size() == 0) *io.out << "no run";
  for (int i = 0; i < resp.runs_size(); ++i) {
    *io.out << (i > 0 ? ", " : "") << "run " << resp.runs(i).file_run_id()
            << " as run " << resp.runs(i).run_id();
  }
  *io.out << " (" << FormatCount(resp.genomes()) << " genomes) from " << path
          << "\n";
  return kExitOk;
}

}  // namespace skerry::cli
