#include "server/api/fleet_service.h"

#include <algorithm>
#include <cmath>
#include <iterator>
#include <vector>

#include "absl/strings/str_cat.h"
#include "absl/strings/str_join.h"
#include "common/version.h"
#include "server/api/grpc_status.h"

namespace skerry::api {

FleetServiceImpl::FleetServiceImpl(store::Store* store, engine::Engine* engine,
                                   scheduler::TaskQueue* queue, Clock* clock,
                                   absl::Duration max_wait)
    : store_(store),
      engine_(engine),
      queue_(queue),
      clock_(clock),
      max_wait_(max_wait) {}

grpc::Status FleetServiceImpl::Join(grpc::ServerContext* ctx,
                                    const skerry::v1::JoinRequest* req,
                                    skerry::v1::JoinResponse* resp) {
  // 0: a worker from before the field, which spoke protocol 1.
  const uint32_t protocol = std::max<uint32_t>(req->protocol_version(), 1);
  if (protocol < kMinProtocolVersion || protocol > kProtocolVersion) {
    // UNIMPLEMENTED: retrying cannot help; one side must be upgraded.
    return ToGrpc(absl::UnimplementedError(absl::StrCat(
        "worker protocol ", protocol, " (release \"",
        req->version().substr(0, 64), "\") is not spoken by this ",
        "coordinator (release ", kVersion, ", worker protocol ",
        kMinProtocolVersion == kProtocolVersion
            ? absl::StrCat(kProtocolVersion)
            : absl::StrCat(kMinProtocolVersion, " to ", kProtocolVersion),
        "): install matching versions of skerry-worker and "
        "skerry-coordinator")));
  }
  if (req->threads() < 1 || req->threads() > 4096) {
    return ToGrpc(absl::InvalidArgumentError(
        absl::StrCat("threads: must be from 1 to 4096, got ", req->threads())));
  }
  if (req->name().size() > 256 || req->host().size() > 256 ||
      req->version().size() > 256 || req->sandbox().size() > 256) {
    return ToGrpc(absl::InvalidArgumentError(
        "name, host, version and sandbox must be at most 256 bytes"));
  }
  size_t evaluator_bytes = 0;
  for (const std::string& e : req->evaluators())
    evaluator_bytes += e.size() + 1;
  if (req->evaluators_size() > 1000 || evaluator_bytes > 64 * 1024) {
    return ToGrpc(absl::InvalidArgumentError(
        "evaluators: at most 1000 names and 64 KiB"));
  }
  absl::StatusOr<const auth::FleetSeal*> seal = Seal();
  if (!seal.ok()) return ToGrpc(seal.status());
  store::WorkerRecord w;
  w.name = req->name().empty() ? "worker" : req->name();
  w.host = req->host();
  w.threads = req->threads();
  w.evaluators = absl::StrJoin(req->evaluators(), ",");
  w.version = req->version();
  w.sandbox = req->sandbox();
  w.joined_ms = w.last_seen_ms = clock_->WallMillis();
  absl::StatusOr<int64_t> id = store_->fleet().RegisterWorker(w);
  if (!id.ok()) {
    // Held, logged and shown like any failed commit (engine.h).
    engine_->NoteStorageTrouble(id.status());
    return ToGrpc(id.status());
  }
  {
    absl::MutexLock l(&mu_);
    const absl::Time now = clock_->Now();
    // Forget workers silent for an hour, so a flood of joins cannot grow this
    // map for good; such a worker gets NOT_FOUND and joins again.
    for (auto it = last_seen_.begin(); it != last_seen_.end();) {
      it = now - it->second > absl::Hours(1) ? last_seen_.erase(it)
                                             : std::next(it);
    }
    last_seen_[static_cast<uint64_t>(*id)] = now;
  }
  resp->set_worker_id(static_cast<uint64_t>(*id));
  resp->set_worker_secret((*seal)->WorkerSecret(static_cast<uint64_t>(*id)));
  resp->set_lease_seconds(absl::ToDoubleSeconds(queue_->lease()));
  return grpc::Status::OK;
}

absl::StatusOr<const auth::FleetSeal*> FleetServiceImpl::Seal() {
  absl::MutexLock l(&mu_);
  if (seal_ == nullptr) {
    absl::StatusOr<std::string> key = store_->fleet().FleetKey();
    if (!key.ok()) {
      engine_->NoteStorageTrouble(key.status());
      return key.status();
    }
    seal_ = std::make_unique<const auth::FleetSeal>(*std::move(key));
  }
  return seal_.get();
}

absl::Status FleetServiceImpl::CheckWorker(uint64_t worker_id,
                                           const std::string& secret) {
  absl::StatusOr<const auth::FleetSeal*> seal = Seal();
  if (!seal.ok()) return seal.status();
  if (!(*seal)->IsWorkerSecret(worker_id, secret)) {
    return absl::NotFoundError(
        absl::StrCat("unknown worker ", worker_id,
                     ", or not its worker_secret: join again"));
  }
  // Known again after a restart, or after an hour's silence (Join).
  absl::MutexLock l(&mu_);
  last_seen_[worker_id] = clock_->Now();
  return absl::OkStatus();
}

grpc::Status FleetServiceImpl::Lease(grpc::ServerContext* ctx,
                                     const skerry::v1::LeaseRequest* req,
                                     skerry::v1::LeaseResponse* resp) {
  absl::Status known = CheckWorker(req->worker_id(), req->worker_secret());
  if (!known.ok()) return ToGrpc(known);
  if (req->max_tasks() == 0 || req->max_tasks() > kMaxTasksPerLease) {
    return ToGrpc(absl::InvalidArgumentError(
        absl::StrCat("max_tasks: must be from 1 to ", kMaxTasksPerLease,
                     ", got ", req->max_tasks())));
  }
  absl::Duration wait = std::min(absl::Milliseconds(req->wait_ms()), max_wait_);
  // Answer before the caller's deadline, with a margin for the reply.
  const absl::Duration left =
      absl::FromChrono(ctx->deadline()) - absl::Now() - absl::Milliseconds(200);
  wait = std::max(absl::ZeroDuration(), std::min(wait, left));
  // A worker of protocol 4 builds natural ES samples itself: they go as
  // recipes, with the centres it does not hold.
  scheduler::TaskQueue::Centres centres;
  centres.held = {req->held_centres().data(),
                  static_cast<size_t>(req->held_centres_size())};
  std::vector<skerry::v1::Task> tasks = queue_->Lease(
      static_cast<int64_t>(req->worker_id()), req->max_tasks(), wait,
      kLeaseAnswerBytes,
      req->protocol_version() >= kSampleRecipeProtocol ? &centres : nullptr);
  for (const auto& [id, genes] : centres.wanted) {
    skerry::v1::Centre* c = resp->add_centres();
    c->set_id(static_cast<uint64_t>(id));
    c->mutable_genes()->Assign(genes->begin(), genes->end());
  }
  absl::StatusOr<const auth::FleetSeal*> seal = Seal();  // known: CheckWorker
  for (skerry::v1::Task& t : tasks) {
    if (req->protocol_version() < kGenes32Protocol && t.genes32_size() > 0) {
      // A worker of protocol 2 would not read genes32 and would score an
      // empty genome: it gets the same values as doubles.
      t.mutable_genes()->Assign(t.genes32().begin(), t.genes32().end());
      t.clear_genes32();
    }
    t.set_lease_proof(
        (*seal)->LeaseProof(req->worker_id(), t.task_id(), t.attempt()));
    *resp->add_tasks() = std::move(t);
  }
  resp->set_lease_seconds(absl::ToDoubleSeconds(queue_->lease()));
  return grpc::Status::OK;
}

grpc::Status FleetServiceImpl::Report(grpc::ServerContext* ctx,
                                      const skerry::v1::ReportRequest* req,
                                      skerry::v1::ReportResponse* resp) {
  absl::Status known = CheckWorker(req->worker_id(), req->worker_secret());
  if (!known.ok()) return ToGrpc(known);
  if (req->results_size() > kMaxResultsPerReport ||
      req->held_task_ids_size() > kMaxResultsPerReport) {
    return ToGrpc(absl::InvalidArgumentError(
        absl::StrCat("a report may carry at most ", kMaxResultsPerReport,
                     " results and held task ids")));
  }
  queue_->Renew(static_cast<int64_t>(req->worker_id()),
                {req->held_task_ids().data(),
                 static_cast<size_t>(req->held_task_ids_size())});
  if (req->results_size() == 0) return grpc::Status::OK;
  // Every field of every result is checked here, so that nothing the store
  // would refuse reaches the group commit, where it would fail every
  // worker's results with it. A bad result is rejected alone.
  absl::StatusOr<const auth::FleetSeal*> seal = Seal();  // known: CheckWorker
  std::vector<skerry::v1::TaskResult> results;
  results.reserve(static_cast<size_t>(req->results_size()));
  uint32_t refused = 0;
  for (int i = 0; i < req->results_size(); ++i) {
    const skerry::v1::TaskResult& r = req->results(i);
    absl::Status bad = CheckResult(r, i);
    if (bad.ok()) {
      // A lease this process may not know (made before a restart) is known
      // from its proof; a wrong proof proves nothing and is ignored.
      if (!r.lease_proof().empty() &&
          (*seal)->IsLeaseProof(req->worker_id(), r.task_id(), r.attempt(),
                                r.lease_proof())) {
        queue_->NoteLease(static_cast<int64_t>(req->worker_id()), r.task_id(),
                          r.attempt());
      }
      results.push_back(r);
      continue;
    }
    ++refused;
    skerry::v1::RejectedResult* x = resp->add_rejected();
    x->set_task_id(r.task_id());
    x->set_code(static_cast<uint32_t>(bad.code()));
    x->set_message(std::string(bad.message()));
  }
  resp->set_ignored(refused);
  const absl::Time arrived = clock_->Now();
  if (!results.empty()) {
    absl::StatusOr<engine::ReportOutcome> outcome =
        engine_->Report(static_cast<int64_t>(req->worker_id()), results);
    if (!outcome.ok()) return ToGrpc(outcome.status());
    resp->set_accepted(outcome->accepted);
    resp->set_ignored(refused + outcome->ignored);
    for (skerry::v1::RejectedResult& r : outcome->rejected) {
      *resp->add_rejected() = std::move(r);
    }
  }
  if (metrics_ != nullptr) {
    const absl::Time now = clock_->Now();
    metrics_->NoteReport(
        static_cast<int64_t>(req->worker_id()), results, resp->accepted(),
        {resp->rejected().begin(), resp->rejected().end()}, now - arrived, now);
  }
  return grpc::Status::OK;
}

absl::Status FleetServiceImpl::CheckResult(const skerry::v1::TaskResult& r,
                                           int index) {
  const std::string where =
      absl::StrCat("results[", index, "] (task ", r.task_id(), ")");
  if (r.attempt() == 0) {
    return absl::InvalidArgumentError(absl::StrCat(
        where,
        ".attempt: must be the attempt its Task carried (1 or more), "
        "got 0"));
  }
  if (!std::isfinite(r.eval_seconds()) || r.eval_seconds() < 0 ||
      r.eval_seconds() > kMaxEvalSeconds) {
    return absl::InvalidArgumentError(
        absl::StrCat(where, ".eval_seconds: must be a finite number from 0 to ",
                     kMaxEvalSeconds, ", got ", r.eval_seconds()));
  }
  if (r.error().size() > kMaxResultErrorBytes) {
    return absl::InvalidArgumentError(
        absl::StrCat(where, ".error: at most ", kMaxResultErrorBytes,
                     " bytes, got ", r.error().size()));
  }
  // score: any double; one that is not finite is a failed attempt
  // (fleet.proto), stored with an error text and no score.
  return absl::OkStatus();
}

grpc::Status FleetServiceImpl::HandBack(grpc::ServerContext* ctx,
                                        const skerry::v1::HandBackRequest* req,
                                        skerry::v1::HandBackResponse* resp) {
  absl::Status known = CheckWorker(req->worker_id(), req->worker_secret());
  if (!known.ok()) return ToGrpc(known);
  if (req->task_ids_size() > kMaxResultsPerReport) {
    return ToGrpc(absl::InvalidArgumentError(
        absl::StrCat("task_ids: at most ", kMaxResultsPerReport, ", got ",
                     req->task_ids_size())));
  }
  resp->set_requeued(static_cast<uint32_t>(queue_->HandBack(
      static_cast<int64_t>(req->worker_id()),
      {req->task_ids().data(), static_cast<size_t>(req->task_ids_size())},
      req->all_held())));
  return grpc::Status::OK;
}

int FleetServiceImpl::ActiveWorkers(absl::Duration within) {
  absl::MutexLock l(&mu_);
  const absl::Time since = clock_->Now() - within;
  int n = 0;
  for (const auto& [id, seen] : last_seen_) {
    if (seen >= since) ++n;
  }
  return n;
}

}  // namespace skerry::api
