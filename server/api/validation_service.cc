#include "server/api/validation_service.h"

#include <algorithm>
#include <string>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "server/api/grpc_status.h"

namespace skerry::api {
namespace {

constexpr uint32_t kDefaultListLimit = 100;
constexpr uint32_t kMaxListLimit = 10000;

}  // namespace

skerry::v1::Validation ToValidationProto(const store::ValidationRecord& v) {
  skerry::v1::Validation out;
  out.set_id(static_cast<uint64_t>(v.id));
  out.set_genome_id(static_cast<uint64_t>(v.genome_id));
  out.mutable_key()->set_run_id(static_cast<uint64_t>(v.run_id));
  out.mutable_key()->set_island(v.island);
  out.mutable_key()->set_generation(v.generation);
  out.mutable_key()->set_slot(v.slot);
  out.set_state(v.state);
  out.set_score(v.score);
  out.set_cases(v.cases);
  out.set_training_state(v.training_state);
  out.set_training_score(v.training_score);
  out.set_reason(v.reason);
  out.set_requested_by(v.requested_by);
  out.set_requested_unix_ms(v.requested_ms);
  out.set_completed_unix_ms(v.completed_ms);
  out.set_attempts(v.attempts);
  out.set_error(v.error);
  out.set_copied_from(static_cast<uint64_t>(v.copied_from));
  return out;
}

absl::StatusOr<int64_t> ResolveGenome(store::Store* store,
                                      const skerry::v1::GenomeRef& ref) {
  switch (ref.ref_case()) {
    case skerry::v1::GenomeRef::kId: {
      const auto id = static_cast<int64_t>(ref.id());
      SKERRY_RETURN_IF_ERROR(
          store->genomes()
              .GetGenome(id, store::GenomeStore::Genes::kStored)
              .status());
      return id;
    }
    case skerry::v1::GenomeRef::kKey: {
      const skerry::v1::GenomeKey& k = ref.key();
      SKERRY_ASSIGN_OR_RETURN(
          std::vector<store::GenomeRecord> generation,
          store->genomes().GetGeneration(static_cast<int64_t>(k.run_id()),
                                         k.island(), k.generation(),
                                         store::GenomeStore::Genes::kStored));
      for (const store::GenomeRecord& g : generation) {
        if (g.slot == k.slot()) return g.id;
      }
      return absl::NotFoundError(absl::StrCat("genome ", k.run_id(), "/",
                                              k.island(), "/", k.generation(),
                                              "/", k.slot(), " not found"));
    }
    case skerry::v1::GenomeRef::kChampionOfRun: {
      SKERRY_ASSIGN_OR_RETURN(
          store::RunRecord run,
          store->runs().GetRun(static_cast<int64_t>(ref.champion_of_run())));
      if (run.champion_id == 0) {
        return absl::NotFoundError(absl::StrCat(
            "run ", run.id, " has no champion yet (no generation completed)"));
      }
      return run.champion_id;
    }
    default:
      return absl::InvalidArgumentError(
          "genome: give an id, a natural key or champion_of_run");
  }
}

grpc::Status ValidationServiceImpl::Validate(
    grpc::ServerContext* ctx, const skerry::v1::ValidateRequest* req,
    skerry::v1::Validation* resp) {
  absl::StatusOr<int64_t> id = ResolveGenome(store_, req->genome());
  if (!id.ok()) return ToGrpc(id.status());
  std::optional<auth::Caller> caller = access_->CallerOf(ctx);
  absl::StatusOr<store::ValidationRecord> v = engine_->RequestValidation(
      *id, caller.has_value() ? caller->principal : "");
  if (!v.ok()) return ToGrpc(v.status());
  access_->Note(ctx, v->run_id, absl::StrCat("genome ", v->genome_id));
  *resp = ToValidationProto(*v);
  return grpc::Status::OK;
}

grpc::Status ValidationServiceImpl::GetValidation(
    grpc::ServerContext*, const skerry::v1::GenomeRef* req,
    skerry::v1::Validation* resp) {
  absl::StatusOr<int64_t> id = ResolveGenome(store_, *req);
  if (!id.ok()) return ToGrpc(id.status());
  absl::StatusOr<std::optional<store::ValidationRecord>> v =
      store_->validations().GetValidation(*id);
  if (!v.ok()) return ToGrpc(v.status());
  if (!v->has_value()) {
    return ToGrpc(absl::NotFoundError(absl::StrCat(
        "genome ", *id, " has not been validated (ask with skerry validate)")));
  }
  *resp = ToValidationProto(**v);
  return grpc::Status::OK;
}

grpc::Status ValidationServiceImpl::ListValidations(
    grpc::ServerContext*, const skerry::v1::ListValidationsRequest* req,
    skerry::v1::ListValidationsResponse* resp) {
  const auto run_id = static_cast<int64_t>(req->run_id());
  if (absl::Status s = store_->runs().GetRun(run_id).status(); !s.ok()) {
    return ToGrpc(s);
  }
  const uint32_t limit = req->limit() == 0
                             ? kDefaultListLimit
                             : std::min(req->limit(), kMaxListLimit);
  absl::StatusOr<std::vector<store::ValidationRecord>> list =
      store_->validations().ListValidations(run_id, static_cast<int>(limit));
  if (!list.ok()) return ToGrpc(list.status());
  for (const store::ValidationRecord& v : *list) {
    *resp->add_validations() = ToValidationProto(v);
  }
  return grpc::Status::OK;
}

}  // namespace skerry::api
