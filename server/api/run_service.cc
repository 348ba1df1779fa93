#include "server/api/run_service.h"

#include <cstdio>

#include "absl/strings/str_cat.h"
#include "common/quote.h"
#include "server/api/grpc_status.h"
#include "server/api/request_bounds.h"
#include "server/api/validation_service.h"

namespace skerry::api {
namespace {

int64_t RunId(uint64_t id) { return static_cast<int64_t>(id); }

}  // namespace

skerry::v1::Genome ToGenomeProto(const store::GenomeRecord& g) {
  skerry::v1::Genome out;
  out.set_id(static_cast<uint64_t>(g.id));
  out.mutable_key()->set_run_id(static_cast<uint64_t>(g.run_id));
  out.mutable_key()->set_island(g.island);
  out.mutable_key()->set_generation(g.generation);
  out.mutable_key()->set_slot(g.slot);
  out.set_origin(g.origin);
  out.set_parent_a(static_cast<uint64_t>(g.parent_a));
  out.set_parent_b(static_cast<uint64_t>(g.parent_b));
  *out.mutable_genes() = {g.genes.begin(), g.genes.end()};
  out.set_score(g.score);
  out.set_state(g.state);
  out.set_attempts(g.attempts);
  out.set_error(g.error);
  out.set_eval_seconds(g.eval_seconds);
  return out;
}

grpc::Status RunServiceImpl::Summarise(int64_t run_id,
                                       skerry::v1::RunSummary* out) {
  absl::StatusOr<skerry::v1::RunSummary> s = engine_->Summary(run_id);
  if (!s.ok()) return ToGrpc(s.status());
  *out = std::move(*s);
  out->set_name(AnsweredName(out->name(), budgets_.max_name_bytes));
  absl::StatusOr<std::string> series = store_->runs().SeriesOfRun(run_id);
  if (!series.ok()) return ToGrpc(series.status());
  out->set_series(*series);
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::SubmitRun(grpc::ServerContext* ctx,
                                       const skerry::v1::SubmitRunRequest* req,
                                       skerry::v1::SubmitRunResponse* resp) {
  // spec_text's size is bounded before any handler runs (request_bounds.h).
  if (absl::Status s = CheckRequestId(req->request_id()); !s.ok()) {
    return ToGrpc(s);
  }
  // The coordinator's budgets, before the engine allocates anything.
  absl::StatusOr<skerry::v1::RunSpec> prepared =
      PrepareSpec(req->spec(), budgets_);
  if (!prepared.ok()) return ToGrpc(prepared.status());
  std::optional<auth::Caller> caller = access_->CallerOf(ctx);
  const std::string owner =
      caller.has_value() ? caller->principal : auth::kLocalPrincipal;
  // A retried submission returns the run its first attempt made.
  auto earlier = [&]() -> absl::StatusOr<std::optional<int64_t>> {
    if (req->request_id().empty()) return std::optional<int64_t>();
    return store_->runs().FindRunByRequest(owner, req->request_id());
  };
  absl::StatusOr<std::optional<int64_t>> first = earlier();
  if (!first.ok()) return ToGrpc(first.status());
  if (first->has_value()) return Summarise(**first, resp->mutable_run());
  absl::StatusOr<store::RunRecord> rec =
      engine_->Submit(*std::move(prepared), req->spec_text(), owner,
                      req->priority(), req->request_id());
  if (!rec.ok()) {
    // Two attempts of one submission raced: the loser returns the winner's.
    first = earlier();
    if (first.ok() && first->has_value()) {
      return Summarise(**first, resp->mutable_run());
    }
    return ToGrpc(rec.status());
  }
  access_->Note(
      ctx, rec->id,
      absl::StrCat("run ", rec->id, " '", rec->name, "' owned by ", owner));
  return Summarise(rec->id, resp->mutable_run());
}

grpc::Status RunServiceImpl::ListRuns(grpc::ServerContext* ctx,
                                      const skerry::v1::ListRunsRequest* req,
                                      skerry::v1::ListRunsResponse* resp) {
  absl::StatusOr<std::vector<skerry::v1::RunSummary>> runs =
      engine_->ListSummaries();
  if (!runs.ok()) return ToGrpc(runs.status());
  absl::StatusOr<std::map<int64_t, std::string>> series =
      store_->runs().SeriesOfRuns();
  if (!series.ok()) return ToGrpc(series.status());
  for (auto& r : *runs) {
    // An old run's name may be far over the budget (common/quote.h).
    r.set_name(AnsweredName(r.name(), budgets_.max_name_bytes));
    if (auto it = series->find(static_cast<int64_t>(r.id()));
        it != series->end()) {
      r.set_series(it->second);
    }
    *resp->add_runs() = std::move(r);
  }
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::GetRun(grpc::ServerContext* ctx,
                                    const skerry::v1::RunRef* req,
                                    skerry::v1::GetRunResponse* resp) {
  grpc::Status s = Summarise(RunId(req->run_id()), resp->mutable_run());
  if (!s.ok()) return s;
  absl::StatusOr<store::RunRecord> rec =
      store_->runs().GetRun(RunId(req->run_id()));
  if (!rec.ok()) return ToGrpc(rec.status());
  *resp->mutable_spec() = rec->spec;
  resp->mutable_spec()->set_name(
      AnsweredName(rec->spec.name(), budgets_.max_name_bytes));
  resp->set_workers(
      static_cast<uint32_t>(fleet_->ActiveWorkers(absl::Minutes(1))));
  absl::StatusOr<uint64_t> failed = store_->genomes().CountFailed(rec->id);
  if (!failed.ok()) return ToGrpc(failed.status());
  resp->set_failed_count(*failed);
  if (*failed > 0) {
    absl::StatusOr<std::vector<store::GenomeRecord>> list =
        store_->genomes().FailedGenomes(rec->id, 20);
    if (!list.ok()) return ToGrpc(list.status());
    for (const store::GenomeRecord& g : *list)
      *resp->add_failed() = ToGenomeProto(g);
  }
  if (rec->champion_id != 0) {
    absl::StatusOr<std::optional<store::ValidationRecord>> v =
        store_->validations().GetValidation(rec->champion_id);
    if (!v.ok()) return ToGrpc(v.status());
    if (v->has_value()) {
      *resp->mutable_champion_validation() = ToValidationProto(**v);
    }
  }
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::PauseRun(grpc::ServerContext* ctx,
                                      const skerry::v1::RunRef* req,
                                      skerry::v1::RunSummary* resp) {
  absl::Status s = engine_->Pause(RunId(req->run_id()));
  if (!s.ok()) return ToGrpc(s);
  return Summarise(RunId(req->run_id()), resp);
}

grpc::Status RunServiceImpl::ResumeRun(grpc::ServerContext* ctx,
                                       const skerry::v1::RunRef* req,
                                       skerry::v1::RunSummary* resp) {
  absl::Status s = engine_->Resume(RunId(req->run_id()));
  if (!s.ok()) return ToGrpc(s);
  return Summarise(RunId(req->run_id()), resp);
}

grpc::Status RunServiceImpl::StopRun(grpc::ServerContext* ctx,
                                     const skerry::v1::RunRef* req,
                                     skerry::v1::RunSummary* resp) {
  absl::Status s = engine_->Stop(RunId(req->run_id()));
  if (!s.ok()) return ToGrpc(s);
  return Summarise(RunId(req->run_id()), resp);
}

grpc::Status RunServiceImpl::SetPriority(
    grpc::ServerContext* ctx, const skerry::v1::SetPriorityRequest* req,
    skerry::v1::RunSummary* resp) {
  absl::Status s = engine_->SetPriority(RunId(req->run_id()), req->priority());
  if (!s.ok()) return ToGrpc(s);
  if (access_ != nullptr) {
    access_->Note(ctx, 0, absl::StrCat("priority ", req->priority()));
  }
  return Summarise(RunId(req->run_id()), resp);
}

grpc::Status RunServiceImpl::GetChampion(
    grpc::ServerContext* ctx, const skerry::v1::RunRef* req,
    skerry::v1::GetChampionResponse* resp) {
  absl::StatusOr<std::optional<store::GenomeRecord>> best =
      store_->genomes().BestGenome(RunId(req->run_id()));
  if (!best.ok()) return ToGrpc(best.status());
  if (!best->has_value()) {
    return ToGrpc(absl::NotFoundError(
        absl::StrCat("run ", req->run_id(), " has no evaluated genome yet")));
  }
  // Asked for: kept whole from now on (GenomeStore::KeepWhole), which
  // writes nothing for a genome stored whole (champions are, from the commit
  // that made them one) or on a read-only coordinator. Only a cache: a
  // failed write loses nothing, and the answer does not depend on it.
  if (absl::Status kept = store_->genomes().KeepWhole(**best); !kept.ok()) {
    std::fprintf(stderr, "run %llu: keeping the champion whole: %s\n",
                 static_cast<unsigned long long>(req->run_id()),
                 kept.ToString().c_str());
  }
  *resp->mutable_genome() = ToGenomeProto(**best);
  absl::StatusOr<std::map<std::string, double>> metrics =
      store_->genomes().GetGenomeMetrics((*best)->id);
  if (!metrics.ok()) return ToGrpc(metrics.status());
  resp->mutable_genome()->mutable_metrics()->insert(metrics->begin(),
                                                    metrics->end());
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::GetHistory(
    grpc::ServerContext* ctx, const skerry::v1::GetHistoryRequest* req,
    skerry::v1::GetHistoryResponse* resp) {
  absl::StatusOr<store::RunRecord> rec =
      store_->runs().GetRun(RunId(req->run_id()));
  if (!rec.ok()) return ToGrpc(rec.status());
  std::optional<uint32_t> island;
  if (!req->all_islands()) island = req->island();
  absl::StatusOr<std::vector<store::StatsRecord>> stats =
      store_->runs().GetStats(RunId(req->run_id()), island);
  if (!stats.ok()) return ToGrpc(stats.status());
  absl::StatusOr<std::map<std::pair<uint32_t, uint32_t>, double>> validated =
      store_->validations().ChampionValidationScores(rec->id);
  if (!validated.ok()) return ToGrpc(validated.status());
  auto metric_means = store_->genomes().MetricMeans(rec->id);
  if (!metric_means.ok()) return ToGrpc(metric_means.status());
  std::map<std::pair<uint32_t, uint32_t>, std::map<uint32_t, uint32_t>>
      migrations;
  if (req->with_migrations()) {
    auto counted = store_->genomes().MigrationCounts(rec->id);
    if (!counted.ok()) return ToGrpc(counted.status());
    migrations = *std::move(counted);
  }
  for (const store::StatsRecord& s : *stats) {
    skerry::v1::GenerationStats* g = resp->add_generations();
    g->set_island(s.island);
    g->set_generation(s.generation);
    g->set_best(s.best);
    g->set_mean(s.mean);
    g->set_worst(s.worst);
    g->set_diversity(s.diversity);
    g->set_evaluations(s.evaluations);
    g->set_failed(s.failed);
    g->set_completed_unix_ms(s.completed_ms);
    if (auto v = validated->find({s.island, s.generation});
        v != validated->end()) {
      g->set_validation_score(v->second);
    }
    if (auto m = metric_means->find({s.island, s.generation});
        m != metric_means->end()) {
      g->mutable_metric_means()->insert(m->second.begin(), m->second.end());
    }
    if (auto m = migrations.find({s.island, s.generation});
        m != migrations.end()) {
      g->mutable_migrants_from()->insert(m->second.begin(), m->second.end());
    }
  }
  return grpc::Status::OK;
}

grpc::Status RunServiceImpl::GetDigest(grpc::ServerContext* ctx,
                                       const skerry::v1::RunRef* req,
                                       skerry::v1::DigestResponse* resp) {
  absl::StatusOr<store::RunRecord> rec =
      store_->runs().GetRun(RunId(req->run_id()));
  if (!rec.ok()) return ToGrpc(rec.status());
  absl::StatusOr<store::GenomeStore::Digest> d =
      store_->genomes().RunDigest(rec->id);
  if (!d.ok()) return ToGrpc(d.status());
  resp->set_sha256(d->sha256);
  resp->set_genomes(d->genomes);
  return grpc::Status::OK;
}

grpc::ServerWriteReactor<skerry::v1::RunSummary>* RunServiceImpl::WatchRun(
    grpc::CallbackServerContext* ctx, const skerry::v1::WatchRunRequest* req) {
  // A callback method: the gate cannot refuse it for us (auth/gate.h).
  if (access_ != nullptr) {
    grpc::Status refusal = access_->Refusal(ctx);
    if (!refusal.ok()) return WatchHub::Refuse(std::move(refusal));
  }
  return watch_hub_.Watch(*req);
}

grpc::ServerBidiReactor<skerry::v1::FollowRunRequest, skerry::v1::RunSummary>*
RunServiceImpl::FollowRun(grpc::CallbackServerContext* ctx) {
  // A callback method: the gate cannot refuse it for us (auth/gate.h). Its
  // first message is judged when it comes.
  if (access_ == nullptr) return watch_hub_.Follow(nullptr);
  grpc::Status refusal = access_->Refusal(ctx, /*before_message=*/true);
  if (!refusal.ok()) return WatchHub::RefuseFollow(std::move(refusal));
  auth::AccessControl* access = access_;
  return watch_hub_.Follow(
      [access, ctx] { return FromGrpc(access->Refusal(ctx)); });
}

}  // namespace skerry::api
