// RunServiceImpl::ArchiveRun and ImportRuns (run_service.h; the protocol in
// proto/skerry/v1/runs.proto, the user's view in docs/user-guide.md,
// "Archiving and importing runs").
//
// Archive is two calls so that nothing is deleted before the caller holds
// the file: the first streams a one-run export (store/backup.h, the source's
// row checksums checked) with the file's SHA-256 and the run's content
// digest (store/run_content.h, computed from the export file itself); the
// caller writes the file, reads it back and checks its SHA-256, then calls
// again with the digest, and the run is deleted (Engine::Delete, audited,
// incremental vacuum) only while its rows in the database still have the
// digest of the file: in the delete's own transaction.
//
// Import writes the request's bytes to a temporary file beside the database
// and merges it (RunStore::ImportRuns: checks first, ids remapped, one
// transaction); its active runs are loaded by the engine.
#include <unistd.h>

#include <atomic>
#include <cstdio>
#include <string>
#include <vector>

#include "absl/strings/ascii.h"
#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/sha256.h"
#include "server/api/grpc_status.h"
#include "server/api/run_service.h"
#include "server/store/backup.h"
#include "server/store/run_content.h"

namespace skerry::api {
namespace {

constexpr size_t kChunkBytes = 1 << 20;

// A temporary file beside the database (same file system and permissions),
// removed however the handler ends.
struct TempFile {
  explicit TempFile(const std::string& db, const char* what) {
    static std::atomic<int> counter{0};
    path = absl::StrCat(db, ".", what, "-", getpid(), "-", counter.fetch_add(1),
                        ".tmp");
    unlink(path.c_str());
  }
  ~TempFile() {
    unlink(path.c_str());
    unlink((path + "-journal").c_str());
  }
  std::string path;
};

bool IsHexDigest(const std::string& s) {
  if (s.size() != 64) return false;
  for (char c : s) {
    if (!absl::ascii_isxdigit(static_cast<unsigned char>(c)) ||
        absl::ascii_isupper(static_cast<unsigned char>(c))) {
      return false;
    }
  }
  return true;
}

}  // namespace

grpc::Status RunServiceImpl::ArchiveRun(
    grpc::ServerContext* ctx, const skerry::v1::ArchiveRunRequest* req,
    grpc::ServerWriter<skerry::v1::ArchiveChunk>* writer) {
  const int64_t run_id = static_cast<int64_t>(req->run_id());
  if (!req->confirm_content().empty()) {
    if (!IsHexDigest(req->confirm_content()) ||
        !IsHexDigest(req->confirm_file_sha256())) {
      return grpc::Status(
          grpc::StatusCode::INVALID_ARGUMENT,
          "confirm_content and confirm_file_sha256: 64 lower-case hex digits "
          "each, as the export's last chunk gave them");
    }
    absl::StatusOr<store::RunStore::Deleted> deleted =
        engine_->Delete(run_id, req->confirm_content());
    if (!deleted.ok()) return ToGrpc(deleted.status());
    skerry::v1::ArchiveChunk out;
    out.mutable_deleted()->set_run_id(req->run_id());
    out.mutable_deleted()->set_genomes(deleted->genomes);
    out.mutable_deleted()->set_bytes_freed(deleted->bytes_freed);
    access_->Note(ctx, run_id,
                  absl::StrCat("archived run ", run_id,
                               ": the caller checked its file "
                               "(sha256 ",
                               req->confirm_file_sha256(),
                               ") of content digest ", req->confirm_content(),
                               "; ", deleted->genomes, " genomes deleted, ",
                               deleted->bytes_freed, " bytes given back"));
    writer->Write(out);
    return grpc::Status::OK;
  }

  absl::StatusOr<store::RunRecord> run = store_->runs().GetRun(run_id);
  if (!run.ok()) return ToGrpc(run.status());
  if (run->state != skerry::v1::FINISHED && run->state != skerry::v1::STOPPED &&
      run->state != skerry::v1::FAILED_RUN) {
    return grpc::Status(grpc::StatusCode::FAILED_PRECONDITION,
                        absl::StrCat("run ", run_id, " is ",
                                     skerry::v1::RunState_Name(run->state),
                                     "; stop it first (`skerry stop ", run_id,
                                     "`), then archive it"));
  }
  TempFile tmp(store_->db().path(), "archive");
  if (absl::Status s =
          store::BackupDatabase(store_->db().path(), run_id, tmp.path);
      !s.ok()) {
    return ToGrpc(s);
  }
  absl::StatusOr<std::string> content =
      store::RunContentDigestOfFile(tmp.path, run_id);
  if (!content.ok()) return ToGrpc(content.status());
  FILE* f = std::fopen(tmp.path.c_str(), "rb");
  if (f == nullptr) {
    return grpc::Status(grpc::StatusCode::INTERNAL,
                        absl::StrCat("cannot read the export ", tmp.path));
  }
  std::fseek(f, 0, SEEK_END);
  const long total = std::ftell(f);
  std::fseek(f, 0, SEEK_SET);
  Sha256 sha;
  std::vector<char> buf(kChunkBytes);
  uint64_t sent = 0;
  bool ok = true;
  while (ok && !ctx->IsCancelled()) {
    const size_t n = std::fread(buf.data(), 1, buf.size(), f);
    sha.Update(absl::string_view(buf.data(), n));
    skerry::v1::ArchiveChunk chunk;
    chunk.set_data(buf.data(), n);
    if (sent == 0) chunk.set_total_bytes(static_cast<uint64_t>(total));
    sent += n;
    const bool last = n < buf.size();
    std::string file_sha;
    if (last) {
      file_sha = sha.FinishHex();
      chunk.set_file_sha256(file_sha);
      chunk.set_content_digest(*content);
    }
    ok = writer->Write(chunk);
    if (last) {
      access_->Note(ctx, run_id,
                    absl::StrCat("exported run ", run_id,
                                 " to archive it: ", sent, " bytes, sha256 ",
                                 file_sha, ", content digest ", *content));
      break;
    }
  }
  std::fclose(f);
  if (ctx->IsCancelled() || !ok) {
    return grpc::Status(grpc::StatusCode::CANCELLED, "export not delivered");
  }
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::ImportRuns(
    grpc::ServerContext* ctx, const skerry::v1::ImportRunsRequest* req,
    skerry::v1::ImportRunsResponse* resp) {
  if (req->file().empty()) {
    return grpc::Status(grpc::StatusCode::INVALID_ARGUMENT,
                        "file: empty; send an export's bytes");
  }
  TempFile tmp(store_->db().path(), "import");
  FILE* f = std::fopen(tmp.path.c_str(), "wb");
  if (f == nullptr ||
      std::fwrite(req->file().data(), 1, req->file().size(), f) !=
          req->file().size() ||
      std::fclose(f) != 0) {
    return grpc::Status(
        grpc::StatusCode::UNAVAILABLE,
        absl::StrCat("cannot write the file beside the database (", tmp.path,
                     "); nothing imported"));
  }
  absl::StatusOr<store::RunStore::Imported> imported =
      engine_->Import(tmp.path);
  if (!imported.ok()) {
    // The message names the temporary file: say "the file" instead.
    std::string message(imported.status().message());
    if (message.rfind(tmp.path, 0) == 0) {
      message = absl::StrCat("the file", message.substr(tmp.path.size()));
    }
    return ToGrpc(absl::Status(imported.status().code(), message));
  }
  std::vector<std::string> runs;
  for (const auto& [from, to] : imported->runs) {
    skerry::v1::ImportedRun* r = resp->add_runs();
    r->set_file_run_id(static_cast<uint64_t>(from));
    r->set_run_id(static_cast<uint64_t>(to));
    runs.push_back(absl::StrCat(from, " as ", to));
  }
  resp->set_genomes(imported->genomes);
  access_->Note(ctx, imported->runs.empty() ? 0 : imported->runs.front().second,
                absl::StrCat("imported ", imported->runs.size(), " run(s) (",
                             absl::StrJoin(runs, ", "), "), ",
                             imported->genomes, " genomes"));
  return grpc::Status::OK;
}

}  // namespace skerry::api
