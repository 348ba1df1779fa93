#include "worker/task_evaluation.h"

#include <algorithm>
#include <cmath>
#include <exception>
#include <iterator>
#include <map>
#include <utility>
#include <vector>

#include "absl/status/status.h"
#include "absl/strings/str_cat.h"
#include "absl/types/span.h"
#include "common/metric_bounds.h"
#include "common/sample_recipe.h"
#include "common/validation.h"
#include "worker/process_evaluator.h"

namespace skerry::worker {
namespace {

std::string ErrorText(const absl::Status& status) {
  if (status.message().empty()) return status.ToString();
  return std::string(status.message());
}

// A C++ exception from an evaluator is a failed attempt, like an error status.
template <typename F>
auto Guarded(F&& f) -> decltype(f()) {
  try {
    return f();
  } catch (const std::exception& e) {
    return absl::InternalError(absl::StrCat("evaluator threw: ", e.what()));
  } catch (...) {
    return absl::InternalError("evaluator threw a non-standard exception");
  }
}

}  // namespace

EvaluatorFactory WorkerEvaluatorFactory(std::vector<std::string> host_command,
                                        ChildSetting setting) {
  return [host_command = std::move(host_command),
          setting = std::move(setting)](const skerry::v1::EvaluatorSpec& spec)
             -> absl::StatusOr<std::unique_ptr<Evaluator>> {
    if (spec.kind_case() != skerry::v1::EvaluatorSpec::kExternal &&
        !spec.isolate()) {
      return MakeEvaluator(spec);
    }
    absl::StatusOr<ProcessEvaluatorOptions> options =
        ProcessOptionsForSpec(spec, host_command);
    if (!options.ok()) return options.status();
    options->sandbox = setting.sandbox;
    options->registry = setting.registry;
    options->clock = setting.clock;
    absl::StatusOr<std::unique_ptr<ProcessEvaluator>> evaluator =
        ProcessEvaluator::Create(*std::move(options));
    if (!evaluator.ok()) return evaluator.status();
    return std::unique_ptr<Evaluator>(std::move(*evaluator));
  };
}

absl::StatusOr<std::unique_ptr<Evaluator>> MakeWorkerEvaluator(
    const skerry::v1::EvaluatorSpec& spec) {
  static const EvaluatorFactory* const factory =
      new EvaluatorFactory(WorkerEvaluatorFactory({}));
  return (*factory)(spec);
}

EvaluatorCache::EvaluatorCache(EvaluatorFactory factory, Clock* clock,
                               CacheLimits limits)
    : factory_(std::move(factory)),
      clock_(clock != nullptr ? clock : Clock::Real()),
      limits_(limits) {
  if (!factory_) factory_ = &MakeWorkerEvaluator;
}

void EvaluatorCache::ReapIdle() {
  const absl::Time now = clock_->Now();
  for (auto it = by_spec_.begin(); it != by_spec_.end();) {
    it = now - it->second.last_used > limits_.max_idle ? by_spec_.erase(it)
                                                       : std::next(it);
  }
}

absl::Duration EvaluatorCache::TimeToNextExpiry() {
  if (by_spec_.empty()) return limits_.max_idle;
  absl::Time oldest = absl::InfiniteFuture();
  for (const auto& [key, entry] : by_spec_) {
    oldest = std::min(oldest, entry.last_used);
  }
  return std::max(absl::ZeroDuration(),
                  oldest + limits_.max_idle - clock_->Now()) +
         absl::Milliseconds(1);
}

absl::StatusOr<Evaluator*> EvaluatorCache::Get(
    const skerry::v1::EvaluatorSpec& spec) {
  ReapIdle();
  std::string key = spec.SerializeAsString();
  auto it = by_spec_.find(key);
  if (it == by_spec_.end()) {
    // Room for the new one: the least recently used go first.
    while (!by_spec_.empty() &&
           by_spec_.size() >= std::max<size_t>(limits_.max_entries, 1)) {
      auto oldest = by_spec_.begin();
      for (auto o = by_spec_.begin(); o != by_spec_.end(); ++o) {
        if (o->second.last_used < oldest->second.last_used) oldest = o;
      }
      by_spec_.erase(oldest);
    }
    Entry entry{Guarded([&]() -> absl::StatusOr<std::unique_ptr<Evaluator>> {
                  return factory_(spec);
                }),
                clock_->Now()};
    it = by_spec_.emplace(std::move(key), std::move(entry)).first;
  }
  it->second.last_used = clock_->Now();
  if (!it->second.evaluator.ok()) return it->second.evaluator.status();
  if (*it->second.evaluator == nullptr) {
    return absl::InternalError("evaluator factory returned no evaluator");
  }
  return it->second.evaluator->get();
}

absl::Status ExpandSample(skerry::v1::Task* task,
                          const std::vector<double>* centre) {
  if (!task->has_sample()) return absl::OkStatus();
  const skerry::v1::SampleTask& s = task->sample();
  if (centre == nullptr) {
    return absl::FailedPreconditionError(
        absl::StrCat("the sample's centre #", s.centre_id(),
                     " is not held by this worker; its lease is given back"));
  }
  SampleRecipe r;
  r.seed = s.seed();
  r.island = s.island();
  r.generation = s.generation();
  r.pair = s.pair();
  r.minus = s.minus();
  r.float32 = s.float32();
  r.length = s.length();
  r.sigma = s.sigma();
  r.lower = s.lower();
  r.upper = s.upper();
  // BuildSample refuses a recipe out of range, as the store's reads do.
  absl::StatusOr<std::vector<double>> genes = BuildSample(r, *centre);
  if (!genes.ok()) {
    return absl::FailedPreconditionError(absl::StrCat(
        "centre #", s.centre_id(), ": ", genes.status().message()));
  }
  task->mutable_genes()->Assign(genes->begin(), genes->end());
  task->clear_genes32();
  task->clear_sample();
  return absl::OkStatus();
}

skerry::v1::TaskResult EvaluateTask(const skerry::v1::Task& task,
                                    EvaluatorCache& cache, Clock* clock) {
  skerry::v1::TaskResult result;
  result.set_task_id(task.task_id());
  result.set_attempt(task.attempt());
  result.set_lease_proof(task.lease_proof());
  const absl::Time start = clock->Now();
  absl::StatusOr<double> score;
  absl::StatusOr<Evaluator*> evaluator = cache.Get(task.evaluator());
  if (evaluator.ok()) {
    // Time limits are enforced by evaluators that run in a child process.
    // A FLOAT32 run's genes come as genes32, widened here (exactly).
    std::vector<double> widened;
    if (task.genes32_size() > 0) {
      widened.assign(task.genes32().begin(), task.genes32().end());
    }
    const auto genes =
        task.genes32_size() > 0
            ? absl::MakeConstSpan(widened)
            : absl::MakeConstSpan(task.genes().data(), task.genes().size());
    score = Guarded([&]() -> absl::StatusOr<double> {
      if (task.kind() == skerry::v1::TASK_VALIDATE) {
        // eval_seed is the run's seed: the cases' seeds come from it.
        return ValidateGenes(**evaluator, task.evaluator(), genes,
                             task.eval_seed());
      }
      return (*evaluator)->Evaluate(genes, task.eval_seed());
    });
  } else {
    score = evaluator.status();
  }
  result.set_eval_seconds(absl::ToDoubleSeconds(clock->Now() - start));
  if (!score.ok()) {
    result.set_error(ErrorText(score.status()));
  } else if (!std::isfinite(*score)) {
    result.set_error(
        absl::StrCat("evaluator returned a non-finite score (", *score, ")"));
  } else {
    result.set_score(*score);
    // Named side measurements: an external program's, or a built-in's
    // (Evaluator::LastMetrics).
    const std::map<std::string, double>* metrics =
        evaluator.ok() ? &(*evaluator)->LastMetrics() : nullptr;
    if (metrics != nullptr && task.kind() == skerry::v1::TASK_EVALUATE &&
        !metrics->empty()) {
      absl::Status bounded = CheckMetrics(*metrics);
      if (!bounded.ok()) {
        result.clear_score();
        result.set_error(std::string(bounded.message()));
      } else {
        result.mutable_metrics()->insert(metrics->begin(), metrics->end());
      }
    }
  }
  return result;
}

}  // namespace skerry::worker
