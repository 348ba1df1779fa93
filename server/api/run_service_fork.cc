// RunServiceImpl::ForkRun (run_service.h): the parent's spec with the
// caller's changes, through the coordinator's budgets, then Engine::Fork;
// and RunServiceImpl::DeleteRun, through Engine::Delete.

#include "absl/strings/str_cat.h"
#include "absl/strings/str_split.h"
#include "server/api/grpc_status.h"
#include "server/api/request_bounds.h"
#include "server/api/run_service.h"
#include "server/engine/fork_spec.h"

namespace skerry::api {
namespace {

// What the fork stores as its spec text: the parent's, then the changes as
// comments, so that the text says where the run came from.
std::string ForkText(const std::string& parent_text, uint64_t parent_id,
                     uint32_t generation, const std::string& changes) {
  std::string out = parent_text;
  if (!out.empty() && out.back() != '\n') out += '\n';
  absl::StrAppend(&out, "# Forked from run ", parent_id, " at generation ",
                  generation, changes.empty() ? " unchanged.\n" : " with:\n");
  for (absl::string_view line : absl::StrSplit(changes, '\n')) {
    if (!line.empty()) absl::StrAppend(&out, "#   ", line, "\n");
  }
  return out;
}

}  // namespace

grpc::Status RunServiceImpl::ForkRun(grpc::ServerContext* ctx,
                                     const skerry::v1::ForkRunRequest* req,
                                     skerry::v1::SubmitRunResponse* resp) {
  // changes' size is bounded before any handler runs (request_bounds.h).
  if (absl::Status s = CheckRequestId(req->request_id()); !s.ok()) {
    return ToGrpc(s);
  }
  const int64_t parent_id = static_cast<int64_t>(req->run_id());
  absl::StatusOr<store::RunRecord> parent = store_->runs().GetRun(parent_id);
  if (!parent.ok()) return ToGrpc(parent.status());
  absl::StatusOr<skerry::v1::RunSpec> merged =
      engine::MergeForkChanges(parent->spec, req->changes());
  if (!merged.ok()) return ToGrpc(merged.status());
  absl::StatusOr<skerry::v1::RunSpec> prepared =
      PrepareSpec(*std::move(merged), budgets_);
  if (!prepared.ok()) return ToGrpc(prepared.status());
  std::optional<auth::Caller> caller = access_->CallerOf(ctx);
  const std::string owner =
      caller.has_value() ? caller->principal : auth::kLocalPrincipal;
  auto earlier = [&]() -> absl::StatusOr<std::optional<int64_t>> {
    if (req->request_id().empty()) return std::optional<int64_t>();
    return store_->runs().FindRunByRequest(owner, req->request_id());
  };
  absl::StatusOr<std::optional<int64_t>> first = earlier();
  if (!first.ok()) return ToGrpc(first.status());
  if (first->has_value()) return Summarise(**first, resp->mutable_run());
  absl::StatusOr<store::RunRecord> rec =
      engine_->Fork(parent_id, req->generation(), *std::move(prepared),
                    ForkText(parent->spec_text, req->run_id(),
                             req->generation(), req->changes()),
                    owner, req->priority(), req->request_id());
  if (!rec.ok()) {
    first = earlier();
    if (first.ok() && first->has_value()) {
      return Summarise(**first, resp->mutable_run());
    }
    return ToGrpc(rec.status());
  }
  access_->Note(ctx, rec->id,
                absl::StrCat("run ", rec->id, " '", rec->name,
                             "' forked from run ", parent_id, " at generation ",
                             req->generation(), " owned by ", owner));
  return Summarise(rec->id, resp->mutable_run());
}

grpc::Status RunServiceImpl::DeleteRun(grpc::ServerContext* ctx,
                                       const skerry::v1::RunRef* req,
                                       skerry::v1::DeleteRunResponse* resp) {
  const int64_t run_id = static_cast<int64_t>(req->run_id());
  absl::StatusOr<store::RunStore::Deleted> deleted = engine_->Delete(run_id);
  if (!deleted.ok()) return ToGrpc(deleted.status());
  resp->set_run_id(req->run_id());
  resp->set_genomes(deleted->genomes);
  resp->set_bytes_freed(deleted->bytes_freed);
  access_->Note(
      ctx, run_id,
      absl::StrCat("deleted run ", run_id, ": ", deleted->genomes, " genomes, ",
                   deleted->bytes_freed, " bytes given back"));
  return grpc::Status::OK;
}

}  // namespace skerry::api
