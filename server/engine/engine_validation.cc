// The engine's held-out validations (see "Held-out validation" in engine.h).
#include <algorithm>
#include <cstdio>
#include <memory>

#include "absl/strings/str_cat.h"
#include "common/status_macros.h"
#include "common/validation.h"
#include "server/engine/engine.h"

namespace skerry::engine {
namespace {

uint32_t CaseCount(const skerry::v1::RunSpec& spec) {
  return ValidationCaseCount(spec.evaluator());
}

}  // namespace

absl::Status Engine::LoadValidations() {
  SKERRY_ASSIGN_OR_RETURN(std::vector<store::ValidationRecord> pending,
                          store_->validations().PendingValidations());
  std::map<int64_t, skerry::v1::RunSpec> specs;  // of runs no longer active
  for (const store::ValidationRecord& v : pending) {
    auto active = runs_.find(v.run_id);
    if (active != runs_.end()) {
      QueueValidation(v, v.genes, active->second->record.spec);
      continue;
    }
    auto it = specs.find(v.run_id);
    if (it == specs.end()) {
      SKERRY_ASSIGN_OR_RETURN(store::RunRecord run,
                              store_->runs().GetRun(v.run_id));
      it = specs.emplace(v.run_id, std::move(run.spec)).first;
    }
    QueueValidation(v, v.genes, it->second);
  }
  return absl::OkStatus();
}

void Engine::QueueValidation(const store::ValidationRecord& v,
                             const std::vector<double>& genes,
                             const skerry::v1::RunSpec& spec) {
  if (v.state != skerry::v1::VALIDATION_PENDING) return;
  if (!validations_
           .emplace(v.id, PendingValidation{v.run_id, spec.max_attempts()})
           .second) {
    return;  // queued already
  }
  auto active = runs_.find(v.run_id);
  scheduler::TaskInfo t;
  t.kind = skerry::v1::TASK_VALIDATE;
  t.genome_id = v.genome_id;
  t.validation_id = v.id;
  t.run_id = v.run_id;
  t.island = v.island;
  t.generation = v.generation;
  t.slot = v.slot;
  t.genes = genes;
  t.float32 = spec.gene_precision() == skerry::v1::FLOAT32;
  t.eval_seed = spec.seed();  // the cases' seeds derive from it
  t.evaluator =
      active != runs_.end()
          ? active->second->evaluator
          : std::make_shared<skerry::v1::EvaluatorSpec>(spec.evaluator());
  t.attempts = v.attempts;
  queue_->Add({std::move(t)});
}

std::optional<store::ValidationRequest> Engine::ChampionValidation(
    const Run& run, const std::vector<store::GenomeRecord>& generation,
    double best, bool new_best) {
  const skerry::v1::RunSpec& spec = run.record.spec;
  if (!HasValidation(spec.evaluator())) return std::nullopt;
  const auto policy = spec.evaluator().validation().champions();
  if (policy == skerry::v1::ON_REQUEST) return std::nullopt;
  if (policy == skerry::v1::NEW_BEST && !new_best) return std::nullopt;
  for (const store::GenomeRecord& g : generation) {
    if (g.state == skerry::v1::EVALUATED && g.score == best) {
      store::ValidationRequest r;
      r.genome_id = g.id;
      r.cases = CaseCount(spec);
      r.reason = skerry::v1::GENERATION_CHAMPION;
      r.now_ms = clock_->WallMillis();
      return r;
    }
  }
  return std::nullopt;
}

void Engine::QueueChampionValidation(const Run& run,
                                     const store::GenomeRecord& g,
                                     const std::vector<double>& genes) {
  absl::StatusOr<std::optional<store::ValidationRecord>> v =
      store_->validations().GetValidation(g.id);
  if (!v.ok() || !v->has_value()) {
    // Stored with the generation: queued at the next start at the latest.
    std::fprintf(stderr,
                 "run %lld: champion validation of genome %lld not "
                 "queued now: %s\n",
                 static_cast<long long>(run.record.id),
                 static_cast<long long>(g.id),
                 v.ok() ? "not found" : v.status().ToString().c_str());
    return;
  }
  QueueValidation(**v, genes, run.record.spec);
}

absl::StatusOr<store::ValidationRecord> Engine::RequestValidation(
    int64_t genome_id, const std::string& requested_by) {
  absl::MutexLock l(&mu_);
  AwaitCommit();  // a writer: not during a result commit
  SKERRY_ASSIGN_OR_RETURN(store::GenomeRecord genome,
                          store_->genomes().GetGenome(genome_id));
  const Run* active = nullptr;
  if (auto it = runs_.find(genome.run_id); it != runs_.end()) {
    active = it->second.get();
  }
  skerry::v1::RunSpec spec;
  if (active != nullptr) {
    spec = active->record.spec;
  } else {
    SKERRY_ASSIGN_OR_RETURN(store::RunRecord run,
                            store_->runs().GetRun(genome.run_id));
    spec = std::move(run.spec);
  }
  if (!HasValidation(spec.evaluator())) {
    return absl::FailedPreconditionError(absl::StrCat(
        "run ", genome.run_id,
        " declares no validation cases (evaluator.validation in its spec)"));
  }
  store::ValidationRequest req;
  req.genome_id = genome_id;
  req.cases = CaseCount(spec);
  req.reason = skerry::v1::REQUESTED;
  req.requested_by = requested_by;
  req.now_ms = clock_->WallMillis();
  // Kept whole in the same transaction, so that its validation (and a later
  // export) reads it without a replay.
  req.genome = &genome;
  absl::StatusOr<store::ValidationRecord> v =
      store_->validations().RequestValidation(req);
  if (!v.ok()) {
    NoteWriteFailure(v.status());
    return v.status();
  }
  QueueValidation(*v, genome.genes, spec);
  NotifyChange();
  return v;
}

store::ValidationUpdate Engine::ValidationOutcome(
    const scheduler::TaskInfo& info, const skerry::v1::TaskResult& r,
    bool failed) {
  store::ValidationUpdate u;
  u.id = info.validation_id;
  u.attempts = std::max({info.attempts, r.attempt(), 1u});
  u.now_ms = clock_->WallMillis();
  if (!failed) {
    u.state = skerry::v1::VALIDATION_DONE;
    u.score = r.score();
    return u;
  }
  u.error = FailureText(r);
  auto it = validations_.find(info.validation_id);
  const uint32_t limit = it != validations_.end() ? it->second.max_attempts : 1;
  u.state = u.attempts >= limit ? skerry::v1::VALIDATION_FAILED
                                : skerry::v1::VALIDATION_PENDING;
  return u;
}

}  // namespace skerry::engine
